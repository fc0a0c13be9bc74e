"""Read an ngspice netlist: files, includes, library sections, subcircuits and statements, into a ``Netlist``."""

from __future__ import annotations

import gc
import os
import threading
from contextlib import contextmanager
from dataclasses import dataclass, field, replace

from netloop.errors import NetlistError, NetlistSyntaxError
from netloop.netlist.cards import MOS_NEEDS, MOS_PINS, parse_card, resolve_bjt, resolve_mos, two_terminal
from netloop.netlist.caveats import control_caveats, open_control, title_caveat
from netloop.netlist.lines import LogicalLine, logical_lines, tokenize
from netloop.netlist.location import SourceLocation
from netloop.netlist.model import Directive, Element, Inclusion, Netlist, Statement, Subcircuit

__all__ = ["gc_paused", "parse_file", "parse_text", "spiceinit_note", "IGNORED_KEYWORDS", "KEPT_KEYWORDS"]

# Analyses and output statements: netloop never runs them; they are set aside in Netlist.ignored.
IGNORED_KEYWORDS = frozenset(
    ".op .ac .dc .tran .noise .pz .meas .measure .save .print .plot .four .sens .tf .disto .probe .width .control .endc".split()
)
# Statements kept verbatim as Directive records.
KEPT_KEYWORDS = frozenset(
    ".param .model .option .options .opt .temp .func .csparam .nodeset .ic .if .elseif .else .endif .global .title".split()
)
_MODEL_KINDS = frozenset("DMJZSWOUQ")
_TWO_TERMINAL = frozenset("RrCcLlVvIi")



@dataclass
class _Frame:
    name: str
    pins: tuple[str, ...]
    params: tuple[tuple[str, str], ...]
    location: SourceLocation
    header: str
    body: list = field(default_factory=list)


@dataclass
class _FileText:
    lines: list[LogicalLine]
    sections: dict[str, tuple[int, int]]  # section -> (first, end) indices into lines


def _split_path_arg(rest: str) -> tuple[str, str]:
    """(path, remainder) from the text after .include/.lib; the path may be quoted."""
    rest = rest.strip()
    if rest[:1] in ("'", '"'):
        q = rest[0]
        end = rest.find(q, 1)
        if end < 0:
            return rest[1:], ""
        return rest[1:end], rest[end + 1 :].strip()
    parts = rest.split(None, 1)
    return parts[0], (parts[1].strip() if len(parts) > 1 else "")


def _model_names(text: str) -> tuple[str, ...]:
    toks = text.split()
    if len(toks) < 2:
        return ()
    name = toks[1].lower()
    base, dot, tail = name.rpartition(".")
    return (name, base) if dot and tail.isdigit() and base else (name,)


# Included files indexed earlier in this process, by path: (text, index). The file is read every time and
# indexed again only when its text changed, so a corner run that reads one process library per corner
# (sky130: 2 MB of model cards, about 90 ms a corner on the worker) splits it into statements once.
# At most _INDEXED_MAX_CHARS of text are kept (the oldest files leave first).
_INDEXED: dict[str, tuple[str, _FileText]] = {}
_INDEXED_MAX_CHARS = 32 << 20
_INDEXED_LOCK = threading.Lock()


def _indexed(path: str, text: str) -> _FileText:
    """The statements and library sections of an included file; shared (read-only) while its text is unchanged."""
    hit = _INDEXED.get(path)
    if hit is not None and hit[0] == text:
        return hit[1]
    ft = _Reader._index(logical_lines(text.splitlines()))
    with _INDEXED_LOCK:  # a library caller may parse from several threads at once
        _INDEXED.pop(path, None)
        kept = sum(len(t) for t, _ in _INDEXED.values())
        while _INDEXED and kept + len(text) > _INDEXED_MAX_CHARS:
            kept -= len(_INDEXED.pop(next(iter(_INDEXED)))[0])
        if len(text) <= _INDEXED_MAX_CHARS:
            _INDEXED[path] = (text, ft)
    return ft


class _Reader:
    def __init__(self) -> None:
        self.files: list[str] = []
        self.lib_sections: list[tuple[str, str]] = []
        self.ignored: list[Directive] = []
        self.warnings: list[str] = []
        # warnings that may concern library content: (top-level definition they are in, or "" for any, warning)
        self.maybe_library: list[tuple[str, str]] = []
        self.globals: list[str] = []
        self.inclusions: list[Inclusion | None] = []
        self.models: set[str] = set()
        self.vdmos: set[str] = set()  # models of type vdmos (their M cards have 3 nodes, or 5 with the thermal nodes)
        self.stack: list[_Frame] = [_Frame("", (), (), SourceLocation("", 0), "")]
        self.cache: dict[str, _FileText] = {}
        self.active: set[tuple[str, str | None]] = set()
        self.has_q = False
        self.has_x = False
        self.top_file = ""
        self.has_model = False  # some card names a model (so undefined models are looked for)

    # -- files ---------------------------------------------------------------------------
    def _load(self, path: str, at: SourceLocation | None) -> _FileText:
        hit = self.cache.get(path)
        if hit is not None:
            return hit
        try:
            with open(path, encoding="utf-8", errors="replace") as fh:
                text = fh.read()
        except OSError as exc:
            where = f"{at}: " if at else ""
            raise NetlistError(f"{where}cannot read {path!r}: {exc.strerror or exc}") from exc
        refuse_binary(path, text, at)
        if path not in self.files:
            self.files.append(path)
        ft = _indexed(path, text)
        self.cache[path] = ft
        return ft

    @staticmethod
    def _index(lines: list[LogicalLine]) -> _FileText:
        sections: dict[str, tuple[int, int]] = {}
        open_name, open_at = None, 0
        for i, (text, _ln, raw) in enumerate(lines):
            if raw or text[:2].lower() != ".l" and text[:2].lower() != ".e":
                continue
            head = text.split()
            kw = head[0].lower()
            if kw == ".lib" and len(head) == 2 and open_name is None:
                open_name, open_at = head[1].lower(), i + 1
            elif kw == ".endl" and open_name is not None:
                sections.setdefault(open_name, (open_at, i))
                open_name = None
        return _FileText(lines, sections)

    def read_top(self, lines: list[LogicalLine], file: str, base_dir: str) -> None:
        self.top_file = file
        self._run(_FileText(lines, {}).lines, 0, len(lines), file, base_dir)

    def _include(self, kind: str, path: str, section: str | None, at: SourceLocation) -> None:
        key = (path, section)
        if key in self.active:
            raise NetlistError(f"{at}: {path!r} includes itself")
        ft = self._load(path, at)
        if section is None:
            first, end = 0, len(ft.lines)
        else:
            span = ft.sections.get(section)
            if span is None:
                known = ", ".join(sorted(ft.sections)) or "none"
                raise NetlistError(f"{at}: library {path!r} has no section {section!r} (sections: {known})")
            first, end = span
            if (path, section) not in self.lib_sections:
                self.lib_sections.append((path, section))
        top = len(self.stack) == 1
        slot = len(self.inclusions)
        if top:
            self.inclusions.append(None)
        start = len(self.stack[0].body)
        ignored_before = len(self.ignored)
        depth_before = len(self.stack)
        self.active.add(key)
        try:
            self._run(ft.lines, first, end, path, os.path.dirname(path))
        finally:
            self.active.discard(key)
        if top:
            if len(self.stack) == depth_before:
                body = tuple(self.stack[0].body[start:])
                self.inclusions[slot] = Inclusion(kind, path, section, body, at, len(self.ignored) == ignored_before)
            else:
                self.inclusions[slot] = None

    # -- statements ----------------------------------------------------------------------
    def _run(self, lines: list[LogicalLine], first: int, end: int, file: str, base_dir: str) -> bool:
        """Read statements lines[first:end]; returns False when ``.end`` stopped the reading."""
        models = self.models
        body = self.stack[-1].body
        append = body.append
        two = two_terminal
        it = iter(lines[first:end])
        for text, ln, raw in it:
            if raw:
                self.ignored.append(Directive(".control", text, SourceLocation(file, ln)))
                continue
            c = text[0]
            if c != ".":
                if c in _TWO_TERMINAL and "=" not in text and "{" not in text and "'" not in text and text.isascii():
                    # fast path for the bulk of large netlists: "R1 a b 1k", "V1 a 0 DC 1"
                    toks = text.split()
                    if len(toks) >= 4:
                        append(two(toks, file, ln))
                        continue
                if c == "+":
                    raise NetlistSyntaxError("a continuation line ('+') with no statement before it to continue", SourceLocation(file, ln), text)
                el = parse_card(text, SourceLocation(file, ln), models, self.vdmos)
                if el.model is not None:
                    self.has_model = True
                k = c.upper()
                if k == "Q":
                    self.has_q = True
                elif k == "X":
                    self.has_x = True
                append(el)
                continue
            kw = text.split(None, 1)[0].lower()
            loc = SourceLocation(file, ln)
            if kw in KEPT_KEYWORDS:
                if kw == ".model":
                    names = _model_names(text)
                    models.update(names)
                    kind = text.split(None, 3)[2:3]
                    if kind and kind[0].split("(")[0].lower() == "vdmos":
                        self.vdmos.update(names)
                elif kw == ".global":
                    for g in text.split()[1:]:
                        g = g.lower()
                        if g not in self.globals:
                            self.globals.append(g)
                append(Directive(kw, text, loc))
            elif kw in IGNORED_KEYWORDS:
                self.ignored.append(Directive(kw, text, loc))
            elif kw == ".subckt":
                self._open_subckt(text, loc)
                body = self.stack[-1].body
                append = body.append
            elif kw == ".ends":
                self._close_subckt(text, loc)
                body = self.stack[-1].body
                append = body.append
            elif kw in (".include", ".inc"):
                rest = text[len(kw) :]
                if not rest.strip():
                    raise NetlistSyntaxError(f"{kw}: expected a file name", SourceLocation(file, ln, len(text) + 2), text)
                path, _ = _split_path_arg(rest)
                self._include("include", os.path.abspath(os.path.join(base_dir, os.path.expanduser(path))), None, loc)
                body = self.stack[-1].body
                append = body.append
            elif kw == ".lib":
                rest = text[4:]
                path, section = _split_path_arg(rest) if rest.strip() else ("", "")
                if not path:
                    raise NetlistSyntaxError(".lib: expected a file name and a section, or a section name", SourceLocation(file, ln, len(text) + 2), text)
                if not section:  # a section definition: skipped unless called by name
                    for skipped, _ln, is_raw in it:
                        if not is_raw and skipped[:5].lower() == ".endl":
                            break
                    else:
                        raise NetlistSyntaxError(
                            f".lib {path}: a library section with no .endl; to read a section of a file write .lib FILE SECTION",
                            SourceLocation(file, ln, len(text) + 2), text)
                    continue
                self._include("lib", os.path.abspath(os.path.join(base_dir, os.path.expanduser(path))), section.split()[0].lower(), loc)
                body = self.stack[-1].body
                append = body.append
            elif kw == ".endl":
                continue
            elif kw == ".end":
                return False
            else:
                self.warnings.append(f"{loc}: unknown statement {kw} kept verbatim")
                append(Directive(kw, text, loc))
        return True

    def _open_subckt(self, text: str, loc: SourceLocation) -> None:
        toks = tokenize(text)
        if len(toks) < 2:
            raise NetlistSyntaxError(".subckt: expected a name and pins", SourceLocation(loc.file, loc.line, len(text) + 2), text)
        name = toks[1].lower()
        pins: list[str] = []
        params: list[tuple[str, str]] = []
        in_params = False
        for t in toks[2:]:
            low = t.lower()
            if low == "params:":
                in_params = True
                continue
            if low.startswith("params:"):
                in_params = True
                t = t[7:]
            if "=" in t:
                k, _, v = t.partition("=")
                params.append((k.strip().lower(), v.strip()))
            elif in_params:
                params.append((t.lower(), ""))
            elif not t.isascii():
                raise NetlistSyntaxError(f".subckt {toks[1]}: pin {t!r} has characters outside ASCII, which ngspice cannot name in "
                                         "its output; rename it with ASCII letters, digits and _", SourceLocation(loc.file, loc.line, text.find(t) + 1), text)
            else:
                pins.append(low)
        self.stack.append(_Frame(name, tuple(pins), tuple(params), loc, text))

    def _close_subckt(self, text: str, loc: SourceLocation) -> None:
        if len(self.stack) == 1:
            raise NetlistSyntaxError(".ends without a .subckt before it", SourceLocation(loc.file, loc.line, 1), text)
        fr = self.stack.pop()
        toks = text.split()
        if len(toks) > 1 and toks[1].lower() != fr.name:
            # ngspice 39 closes the innermost open definition whatever the name says (see the tests); so do we, with a warning
            said = f"{loc}: .ends {toks[1]} closes .subckt {fr.name} (the innermost open definition)"
            if loc.file == self.top_file:
                self.warnings.append(said)
            else:  # a library's own habit, whether or not the circuit uses the definition
                self.maybe_library.append(("", said))
        self.stack[-1].body.append(Subcircuit(fr.name, fr.pins, fr.params, tuple(fr.body), fr.location, fr.header))

    # -- finishing -----------------------------------------------------------------------
    def finish(self, title: str, source: str) -> Netlist:
        if len(self.stack) > 1:
            fr = self.stack[-1]
            raise NetlistSyntaxError(f".subckt {fr.name}: expected .ends before the end of the netlist", fr.location, fr.header)
        body = self.stack[0].body
        statements: tuple[Statement, ...] = tuple(body)
        if self.has_q or self.has_x or self.models or self.has_model:
            statements = self._resolve(statements, ({},), None)
            if statements != tuple(body):
                # inclusions hold the unresolved records; re-slice them from the resolved list by identity of position
                self._reslice(tuple(body), statements)
        library = self._library_warnings(statements)
        own = tuple(w for _, w in self.maybe_library if w not in library)
        folded = (_folded(library),) if library else ()
        blocks = [d for d in self.ignored if d.keyword == ".control"]
        caveats = tuple(w for w in (title_caveat(title, source, statements, self.models), *map(open_control, blocks)) if w)
        caveats = (*caveats, *control_caveats(blocks, statements))
        return Netlist(
            title=title,
            statements=statements,
            source=source,
            ignored=tuple(self.ignored),
            files=tuple(self.files),
            lib_sections=tuple(self.lib_sections),
            globals=tuple(self.globals),
            warnings=(*caveats, *self.warnings, *own, *folded),
            caveats=caveats,
            library_warnings=library,
            inclusions=tuple(x for x in self.inclusions if x is not None),
        )

    def _reslice(self, old: tuple, new: tuple) -> None:
        pos = {id(s): i for i, s in enumerate(old)}
        for k, inc in enumerate(self.inclusions):
            if inc is None or not inc.statements:
                continue
            i = pos.get(id(inc.statements[0]))
            if i is not None:
                self.inclusions[k] = replace(inc, statements=new[i : i + len(inc.statements)])

    def _library_warnings(self, statements: tuple) -> tuple[str, ...]:
        """The warnings about library content: in top-level definitions no instance of the circuit reaches, and .ends
        habits of included files."""
        if not self.maybe_library:
            return ()
        defs = {s.name: s for s in statements if isinstance(s, Subcircuit)}
        reached: set[str] = set()
        todo = [s.model for s in statements if isinstance(s, Element) and s.kind == "X"]
        while todo:
            name = todo.pop()
            if name in reached or name not in defs:
                continue
            reached.add(name)
            bodies = [defs[name].body]
            while bodies:
                for s in bodies.pop():
                    if isinstance(s, Element) and s.kind == "X":
                        todo.append(s.model)
                    elif isinstance(s, Subcircuit):
                        bodies.append(s.body)
        return tuple(w for within, w in self.maybe_library if within not in reached)

    def _warn(self, within: str | None, file: str, warning: str) -> None:
        """A warning about a card of the top level (``within`` None) or of a definition: one in an included file may be
        about library content the circuit does not use (decided once every definition is known)."""
        if within is None or file == self.top_file:
            self.warnings.append(warning)
        else:
            self.maybe_library.append((within, warning))

    def _resolve(self, statements: tuple, scopes: tuple, within: str | None) -> tuple:
        """Give X cards their definitions' pin names and Q cards their final node count (definitions may come later).
        ``within``: the top-level definition these statements are in (None: the top level)."""
        local = {s.name: s for s in statements if isinstance(s, Subcircuit)}
        scopes = (local, *scopes) if local else scopes
        out = []
        changed = False
        for s in statements:
            new = s
            if isinstance(s, Element):
                k = s.kind
                if k == "Q":  # first: a model defined after the card changes which token is the model
                    count = resolve_bjt(s.tokens, self.models)
                    if count != len(s.node_slots):
                        slots = tuple(range(count))
                        toks = list(s.tokens)
                        for j in slots:
                            toks[j] = toks[j].lower()
                        new = replace(s, tokens=tuple(toks), node_slots=slots,
                                      pins=("c", "b", "e", "sub")[:count], model=s.tokens[count].lower())
                elif k == "M":  # a vdmos model defined after the card changes how many nodes it has
                    count = resolve_mos(s.tokens, self.vdmos)
                    if count == 3 and s.tokens[3].lower() not in self.vdmos:
                        raise NetlistSyntaxError(f"{s.name}: expected {MOS_NEEDS}", SourceLocation(s.location.file, s.location.line, len(s.card()) + 2), s.card())
                    if count != len(s.node_slots):
                        new = replace(s, node_slots=tuple(range(count)), pins=MOS_PINS[count], model=s.tokens[count].lower())
                if k == "X":
                    sub = next((sc[s.model] for sc in scopes if s.model in sc), None)
                    if sub is None:
                        self._warn(within, s.location.file, f"{s.location}: {s.name}: undefined subcircuit {s.model!r}")
                    elif len(sub.pins) != len(s.node_slots):
                        raise NetlistSyntaxError(
                            f"{s.name}: subcircuit {sub.name} has {len(sub.pins)} pins ({' '.join(sub.pins)}), the card gives {len(s.node_slots)} nodes",
                            s.location, s.card())
                    elif sub.pins != s.pins:
                        new = replace(s, pins=sub.pins)
                elif new.model is not None and k in _MODEL_KINDS and new.model not in self.models:
                    if not any(new.model in sc for sc in scopes):  # ngspice also accepts a subcircuit here
                        self._warn(within, s.location.file, f"{s.location}: {s.name}: undefined model {new.model!r}")
            elif isinstance(s, Subcircuit):
                body = self._resolve(s.body, scopes, s.name if within is None else within)
                if body != s.body:
                    new = replace(s, body=body)
            changed |= new is not s
            out.append(new)
        return tuple(out) if changed else statements


def _folded(library: tuple[str, ...]) -> str:
    """One line for the warnings about library content the circuit does not use: counted by kind, the files named."""
    kinds: dict[str, int] = {}
    for w in library:
        kind = next((k for k in ("undefined subcircuit", "undefined model", ".ends") if k in w), "other")
        kinds[kind] = kinds.get(kind, 0) + 1
    files = list(dict.fromkeys(w.split(":", 1)[0] for w in library))
    counts = ", ".join(f"{n} {'.ends naming another definition' if k == '.ends' else k}" for k, n in kinds.items())
    where = os.path.basename(files[0]) + (f" and {len(files) - 1} more file(s)" if len(files) > 1 else "")
    return (f"{len(library)} warning(s) about library content the circuit does not use ({counts}; in {where}); "
            "each is listed in library_warnings (--json)")


def _title_and_rest(raw: list[str]) -> tuple[str, list[LogicalLine]]:
    title = raw[0].strip() if raw else ""
    return title, logical_lines(raw, 1)


def parse_text(text: str, source: str = "<string>", base_dir: str | None = None) -> Netlist:
    """Parse netlist text; the first line is the title; includes resolve against ``base_dir`` (default: cwd)."""
    raw = text.splitlines()
    title, lines = _title_and_rest(raw)
    r = _Reader()
    if source != "<string>":
        r.files.append(source)
    with gc_paused():
        r.read_top(lines, source, base_dir if base_dir is not None else os.getcwd())
        return r.finish(title, source)


@contextmanager
def gc_paused():
    """Pause the cyclic garbage collector while building millions of acyclic records.

    The records hold no reference cycles, so the collector would only rescan them again and
    again (it roughly doubles the time to read a million-element netlist); on leaving, the
    objects alive are promoted to the oldest generation for the same reason.
    """
    was = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was:
            # move everything to the oldest generation without a scan, so that the next young
            # collection does not walk a million fresh records (freeze + unfreeze does just that)
            gc.freeze()
            gc.unfreeze()
            gc.enable()


def parse_file(path: str | os.PathLike) -> Netlist:
    """Parse a netlist file (includes are read relative to the file that names them)."""
    p = os.path.abspath(os.fspath(path))
    try:
        with open(p, encoding="utf-8", errors="replace") as fh:
            text = fh.read()
    except OSError as exc:
        raise NetlistError(f"cannot read netlist {os.fspath(path)!r}: {exc.strerror or exc}") from exc
    refuse_binary(os.fspath(path), text)
    netlist = parse_text(text, source=p, base_dir=os.path.dirname(p))
    note = spiceinit_note(os.path.dirname(p))
    return replace(netlist, warnings=(*netlist.warnings, note)) if note else netlist


def refuse_binary(path: str, text: str, at: SourceLocation | None = None) -> None:
    """NetlistError when a file meant as a netlist holds a NUL byte (an object file, an image, a raw file): no SPICE text
    does, and its lines are not echoed to the terminal."""
    nul = text.find("\x00")
    if nul < 0:
        return
    line = text.count("\n", 0, nul) + 1
    where = f"{at}: " if at else ""
    raise NetlistError(f"{where}{path}:{line}: not a text netlist: it holds binary bytes (a NUL byte on line {line}); "
                       "give the SPICE netlist file")


def spiceinit_note(folder: str) -> str | None:
    """A warning when ``folder`` holds a ``.spiceinit`` that ngspice will not read for this netlist.

    ngspice 39 reads ``.spiceinit`` from the folder it runs in (the ngspice program, failing that, from the
    home folder), never from the netlist's folder; netloop runs ngspice in the caller's current folder, so a ``.spiceinit`` next
    to a netlist elsewhere (say one holding ``set ngbehavior=hsa`` for a process library) is lost.
    """
    path = os.path.join(folder, ".spiceinit")
    if not os.path.isfile(path) or os.path.samefile(folder, os.getcwd()):
        return None
    try:
        with open(path, encoding="utf-8", errors="replace") as fh:
            sets = [ln.strip() for ln in fh if ln.strip().lower().startswith(("set ", "option"))]
    except OSError:
        sets = []
    said = f" (it says: {'; '.join(sets)})" if sets else ""
    return (
        f"{path}{said} is not read: ngspice reads .spiceinit only from the folder it runs in (netloop runs it in "
        f"the current folder, {os.getcwd()}); run netloop from {folder} or copy the file to the current folder"
    )
