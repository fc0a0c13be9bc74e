"""Apply a corner's settings to a netlist: a new Netlist from a rewritten copy; the user's files are never written."""

from __future__ import annotations

import os
import re
from dataclasses import replace
from pathlib import Path

from netloop.jobs.corners.plan import Setting
from netloop.errors import NetlistError, NetloopError
from netloop.netlist import Directive, Element, Netlist, SourceLocation, parse_file, parse_text

__all__ = ["CornerApplyError", "apply_settings", "include_lines", "lib_lines", "param_text", "seed_line"]

_LIB_LINE = re.compile(r"^(?P<head>\s*\.lib\s+(?:\"[^\"]*\"|'[^']*'|\S+)\s+)(?P<section>[^\s$;]+)", re.IGNORECASE)
_PATH = re.compile(r"^\s*\.(?:include|inc|lib)\s+(?:\"(?P<dq>[^\"]*)\"|'(?P<sq>[^']*)'|(?P<bare>[^\s\"']+))", re.IGNORECASE)
_SOURCE_WORDS = frozenset("ac dc pulse sin exp pwl sffm am trnoise trrandom distof1 distof2 portnum z0".split())


class CornerApplyError(NetloopError):
    """A setting that the netlist cannot take (no such .lib line, .param or voltage source); ``setting`` says which."""

    def __init__(self, message: str, setting: Setting | None = None):
        self.setting = setting
        super().__init__(message)


def lib_lines(netlist: Netlist) -> tuple[tuple[str, int, str, str], ...]:
    """The top file's ``.lib FILE SECTION`` lines: (resolved library path, line, section, file as written)."""
    out = []
    for inc in netlist.inclusions:
        if inc.kind == "lib" and inc.location.file == netlist.source:
            out.append((inc.path, inc.location.line, inc.section or "", os.path.basename(inc.path)))
    return tuple(out)


def include_lines(netlist: Netlist) -> tuple[tuple[int, str], ...]:
    """The top file's ``.include`` and ``.lib FILE`` lines: (line, resolved path of the file read)."""
    return tuple((inc.location.line, inc.path) for inc in netlist.inclusions if inc.location.file == netlist.source)


def _pick_lib(netlist: Netlist, target: str) -> tuple[str, int, str, str]:
    """The .lib line a setting's target names: "" for the only one, else by its file (the end of its path) or,
    when no file matches, by its section word as the netlist writes it."""
    lines = lib_lines(netlist)
    if not lines:
        raise CornerApplyError(f"{netlist.source} has no '.lib FILE SECTION' line of its own to change")
    listed = ", ".join(f"{b} {sec} (line {ln})" for _, ln, sec, b in lines)
    if not target:
        if len(lines) > 1:
            raise CornerApplyError(f"{netlist.source} has several .lib lines ({listed}); name the one to change, by its section as "
                                   f"written (lib.{lines[0][2] or 'SECTION'} = ...) or its file (lib.\"{lines[0][3]}\" = ...), or "
                                   "switch them together with a process corner ([process.NAME], see the README)")
        return lines[0]
    want = target.replace("\\", "/").lower()
    by_file = [ln for ln in lines if ln[0].replace("\\", "/").lower().endswith(want)]
    if len(by_file) == 1:
        return by_file[0]
    if len(by_file) > 1:
        sections = ", ".join(f"{sec} (line {ln})" for _, ln, sec, _ in by_file)
        first = by_file[0][2]
        raise CornerApplyError(f"{netlist.source}: {len(by_file)} .lib lines read {target!r}, one per device family: {sections}; "
                               f"name each by its section as written, e.g. lib.{first} = ..., and switch them together with a "
                               f"process corner: [process.NAME] with lib.{first} = \"...\" and the others, then process = [\"NAME\", ...] "
                               "in [axes] (see the README)")
    by_section = [ln for ln in lines if ln[2].lower() == target.lower()]
    if len(by_section) == 1:
        return by_section[0]
    what = "more than one" if by_section else "no"
    raise CornerApplyError(f"{netlist.source}: {what} .lib line reads a file ending in {target!r} or has the section {target!r} "
                           f"(its .lib lines: {listed})")


def _swap_word(path: str, word: str, value: str) -> str:
    """``path`` with every occurrence of ``word`` that letters and digits do not adjoin replaced by ``value``."""
    return re.sub(rf"(?<![A-Za-z0-9]){re.escape(word)}(?![A-Za-z0-9])", lambda _: value, path)


def _with_lines(netlist: Netlist, libs: tuple[Setting, ...], includes: tuple[Setting, ...]) -> Netlist:
    """Re-read the top file with the section word of the chosen .lib lines and the corner word of its include
    paths replaced (one physical line each); CornerApplyError names the setting a line cannot take."""
    if not libs and not includes:
        return netlist
    path = netlist.source
    try:
        raw = Path(path).read_text(encoding="utf-8", errors="replace").splitlines()
    except OSError as exc:
        raise NetlistError(f"cannot read netlist {path!r}: {exc.strerror or exc}") from exc
    for s in libs:
        try:
            _, line, _, _ = _pick_lib(netlist, s.target)
        except CornerApplyError as exc:
            raise CornerApplyError(str(exc), s) from exc
        m = _LIB_LINE.match(raw[line - 1])
        if m is None:
            raise CornerApplyError(f"{path}:{line}: cannot find the section word of this .lib line", s)
        raw[line - 1] = m["head"] + s.value + raw[line - 1][m.end("section"):]
    for s in includes:
        swapped = 0
        for line, _ in include_lines(netlist):
            m = _PATH.match(raw[line - 1])
            if m is None or (raw[line - 1].lstrip().lower().startswith(".lib") and _LIB_LINE.match(raw[line - 1]) is None):
                continue
            group = next(g for g in ("dq", "sq", "bare") if m[g] is not None)
            old = m[group]
            new = _swap_word(old, s.target, s.value)
            if new == old and not re.search(rf"(?<![A-Za-z0-9]){re.escape(s.target)}(?![A-Za-z0-9])", old):
                continue
            target = new if os.path.isabs(new) else os.path.join(os.path.dirname(path), new)
            if not os.path.isfile(target):
                raise CornerApplyError(f"{path}:{line}: with {s.target!r} replaced by {s.value!r} this line would read {new!r}, "
                                       "which does not exist", s)
            raw[line - 1] = raw[line - 1][:m.start(group)] + new + raw[line - 1][m.end(group):]
            swapped += 1
        if not swapped:
            paths = ", ".join(os.path.basename(p) for _, p in include_lines(netlist)[:4]) or "none"
            raise CornerApplyError(f"{path}: no .include or .lib path of its own holds the corner word {s.target!r} "
                                   f"(as a word of its own, e.g. .../{s.target}/... or ..._{s.target}.spice; its include files: {paths})", s)
    try:
        return parse_text("\n".join(raw) + "\n", source=path, base_dir=os.path.dirname(path))
    except NetlistError as exc:
        settings = (*libs, *includes)
        raise CornerApplyError(str(exc), settings[0] if len(settings) == 1 else None) from exc


def param_text(value: str) -> str:
    """How a param setting's value is written on the .param line: as given when it is a plain word, else in braces."""
    return value if re.fullmatch(r"[\w.+-]+", value) else "{" + value.strip("{}") + "}"


def _set_param(netlist_statements: tuple, name: str, value: str) -> tuple[tuple, bool]:
    shown = param_text(value)
    pat = re.compile(rf"(?P<pre>(?:^|[\s,]){re.escape(name)}\s*=\s*)(?P<val>\{{[^}}]*\}}|'[^']*'|\"[^\"]*\"|[^\s,]+)", re.IGNORECASE)
    found = False
    out = []
    for s in netlist_statements:
        if isinstance(s, Directive) and s.keyword == ".param" and pat.search(s.text):
            found = True
            s = replace(s, text=pat.sub(lambda m: m["pre"] + shown, s.text))
        out.append(s)
    return tuple(out), found


def _set_supply(statements: tuple, setting: Setting) -> tuple[tuple, bool]:
    key, volts = setting.target.lower(), setting.value
    out, found = [], False
    for s in statements:
        if isinstance(s, Element) and s.key == key:
            if s.kind != "V":
                raise CornerApplyError(f"{s.location}: {s.name} is not a voltage source; a supply setting needs a V element", setting)
            toks = list(s.tokens)
            rest = 2
            if len(toks) > rest and toks[rest].lower() == "dc":
                if len(toks) > rest + 1:
                    toks[rest + 1] = volts
                else:
                    toks.append(volts)
            elif len(toks) > rest and toks[rest].split("(")[0].lower() not in _SOURCE_WORDS:
                toks[rest] = volts
            else:
                toks[rest:rest] = ["dc", volts]
            s = replace(s, tokens=tuple(toks))
            found = True
        out.append(s)
    return tuple(out), found


def _set_element(statements: tuple, setting: Setting) -> tuple[tuple, bool]:
    """The value of the top-level resistor, capacitor or inductor ``setting.target`` (the token after its nodes) replaced."""
    key, out, found = setting.target.lower(), [], False
    for s in statements:
        if isinstance(s, Element) and s.key == key:
            if s.kind not in "RCL" or len(s.tokens) < 3 or "=" in s.tokens[2]:
                raise CornerApplyError(f"{s.location}: {s.name} is not a resistor, capacitor or inductor with its value after its "
                                       "nodes; an element setting changes such a value (a source's is supply.NAME, anything else "
                                       "a .param the card uses)", setting)
            s = replace(s, tokens=(*s.tokens[:2], setting.value, *s.tokens[3:]))
            found = True
        out.append(s)
    return tuple(out), found


def _set_temp(statements: tuple, celsius: str, where: SourceLocation) -> tuple:
    temp_opt = re.compile(r"(?:^|\s)temp\s*=\s*\S+", re.IGNORECASE)
    out = []
    for s in statements:
        if isinstance(s, Directive) and s.keyword == ".temp":
            continue
        if isinstance(s, Directive) and s.keyword in (".option", ".options", ".opt") and temp_opt.search(s.text):
            s = replace(s, text=temp_opt.sub("", s.text))
        out.append(s)
    out.append(Directive(".temp", f".temp {celsius}", where))
    return tuple(out)


def seed_line(seed: str, where: SourceLocation) -> Directive:
    """The line that gives ngspice its random seed, ``.option seed=N``: the ``agauss``/``gauss``/``unif`` values of
    the circuit (a process's mismatch models) are drawn from it when ngspice reads the circuit. It goes first,
    because ngspice takes the first seed it reads (a netlist's own ``.option seed`` after it is overruled)."""
    return Directive(".option", f".option seed={seed}", where)


def apply_settings(netlist: Netlist | str, settings: tuple[Setting, ...], *, origin: SourceLocation | None = None) -> Netlist:
    """The netlist with the settings applied (the ``netlist`` setting is the caller's business: pass that file).

    ``.lib`` sections and include corner words: the top file is read again with the section word of that
    line, and the corner word in its include paths, replaced (``process`` settings arrive expanded into these).
    ``.param NAME``: every top-level definition of NAME gets the value. ``supply`` NAME: the DC value
    of the top-level voltage source NAME. ``element`` NAME: the value of the top-level R, C or L NAME. ``temp``: any ``.temp`` (and ``temp=`` option) is dropped
    and ``.temp VALUE`` added. ``seed`` (a statistical sample's): ``.option seed=VALUE`` first (`seed_line`).
    CornerApplyError when the netlist has no such line, parameter or source.
    """
    base = parse_file(netlist) if isinstance(netlist, str) else netlist
    libs = tuple(s for s in settings if s.kind == "lib")
    includes = tuple(s for s in settings if s.kind == "include")
    nl = _with_lines(base, libs, includes)
    statements = nl.statements
    where = origin or SourceLocation("<corner>", 1)
    for s in settings:
        if s.kind == "param":
            statements, found = _set_param(statements, s.target, s.value)
            if not found:
                raise CornerApplyError(f"{nl.source} has no top-level '.param {s.target}=...' to change", s)
        elif s.kind == "supply":
            statements, found = _set_supply(statements, s)
            if not found:
                raise CornerApplyError(f"{nl.source} has no top-level voltage source {s.target!r}", s)
        elif s.kind == "element":
            statements, found = _set_element(statements, s)
            if not found:
                raise CornerApplyError(f"{nl.source} has no top-level resistor, capacitor or inductor {s.target!r}", s)
        elif s.kind == "temp":
            statements = _set_temp(statements, s.value, where)
        elif s.kind == "seed":
            statements = (seed_line(s.value, where), *statements)
    if statements is nl.statements:
        return nl
    return replace(nl, statements=statements, _index={})
