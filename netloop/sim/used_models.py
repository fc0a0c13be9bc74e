"""The deck as ngspice should read it: its model libraries written in, without the model cards and subcircuits the circuit never uses.

A process library reads far more than one circuit uses: the official sky130 corner section brings in
171 files, 7 MB of model cards for every device of the process, and ngspice reads and sets up every
card before the first analysis (about 4 s on the development machine; 90 % of a check of a small
circuit). ``used_only`` writes the deck's ``.include`` and ``.lib`` lines out as the lines of the files
they read (ngspice's own rules: a ``.lib FILE SECTION`` line reads that section, paths relative to the
file that names them), and leaves out each ``.model`` card and ``.subckt`` block that no element the
circuit keeps refers to. Everything else stays, in order and verbatim: parameters, options, functions,
conditional blocks, comments. Only names that are never looked up go, so ngspice builds the same
circuit and gives the same numbers bit for bit (tests/sim/test_used_models.py compares them on the
sky130 regulator and on invented libraries) while reading a third of the text.

Which definitions a circuit uses is read from the words of the lines it keeps (any word, wherever it
stands, counts as a use: a name kept by mistake costs time, never a result). A binned model
(``nch.1``, ``nch.2``, ...) is used whenever ``nch`` is. When a library holds something this reading
does not follow (a file that cannot be read, an ``.include`` inside a subcircuit, a ``.lib`` line
whose section is missing, an ``.end``, an unclosed ``.subckt``), the deck is left as written
(``None``), and ngspice reads it as the user wrote it.

A process keeps what it read: each library file while it is unchanged (``_read``); the words and the
written-out text of each library item (``_derived``); what each ``.include`` or ``.lib`` line of a deck
stands for, its items with their names and words, while every file it read keeps its size and
modification time and no file appears where a path was looked for first (``_library``); and the
libraries written out for the names a deck's own lines define and use (``_kept``). A worker that loads
the same libraries again (a statistical plan's samples, one load a seed, differ in their seed line;
corners of one process section) reads only the deck's own few lines and joins kept pieces. The sky130
Miller buffer at ``tt_mm`` takes about 0.1 s of Python for its first load (the files read, the words
of every item), then 0.3 to 0.5 ms a load, where keeping only the items took 5 to 7 ms (ten seeds'
decks, both timed in turns in one process on the 2-CPU development machine at load 4).
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass, field
from stat import S_ISREG

__all__ = ["used_only", "used_pieces", "warm"]

_WORD = re.compile(r"[^\s=(),\[\]{}']+")
_BIN = re.compile(r"^(.*)\.\d+$")


class _Unfollowed(Exception):
    """Something in the libraries this reading does not follow: the deck stays as written."""


_COMMENTS = re.compile(r"^[ \t]*(?:\*[^\n]*)?(?:\n|\Z)", re.MULTILINE)  # comment and blank lines: ngspice drops them
_STATEMENT_START = re.compile(r"\n(?![ \t]*\+)")  # a line that does not continue the one before
_CONTINUATION = re.compile(r"\n[ \t]*\+")


@dataclass(frozen=True, slots=True)
class _Statement:
    """One statement of a file: its physical lines (the first and its continuations), as written."""

    text: str  # the physical lines joined with "\n"

    @property
    def kw(self) -> str:
        """Its first word, lower-case (a directive's keyword, an element's name)."""
        return self.text.split(None, 1)[0].lower()

    @property
    def words(self) -> tuple[str, ...]:
        """Its words, lower-case: an element's with its continuations joined, a directive's from its first line (and
        the next when the first holds fewer than three)."""
        text = self.text
        first, _, more = text.partition("\n")
        if first.lstrip()[:1] == "." and (len(first.split()) >= 3 or not more):
            return tuple(first.lower().split())
        return tuple(_CONTINUATION.sub(" ", text).lower().split())


def _statements(text: str) -> list[_Statement]:
    """A file's statements in order, without the comment and blank lines ngspice drops."""
    text = _COMMENTS.sub("", text.replace("\r\n", "\n") if "\r" in text else text)
    return [_Statement(t) for t in _STATEMENT_START.split(text) if t.strip()]


@dataclass(slots=True)
class _Item:
    """A piece of the written-out deck: text kept as it is, or a definition (kept when its name is used)."""

    text: str
    name: str = ""  # "" for text; the model (bin suffix dropped) or subcircuit it defines
    library: bool = False  # read from a library file (not the deck itself): what is derived from it is kept (_derived)


_Stamp = tuple[int, int]  # a file's (mtime_ns, size): the state it was read in
_FILES: dict[str, tuple[_Stamp, list[_Statement]]] = {}  # path -> (stamp, statements)


def _read(path: str) -> tuple[_Stamp, list[_Statement]]:
    """The statements of a library file and the state they were read in, kept per process while the file is unchanged
    (corner workers load it often)."""
    try:
        st = os.stat(path)
        stamp = (st.st_mtime_ns, st.st_size)
        hit = _FILES.get(path)
        if hit is not None and hit[0] == stamp:
            return hit
        with open(path, encoding="utf-8", errors="replace") as fh:
            statements = _statements(fh.read())
    except OSError as exc:
        raise _Unfollowed(str(exc)) from exc
    _FILES[path] = (stamp, statements)
    return stamp, statements


def _path(word: str, here: str, absent: list[str]) -> str:
    """The file a path word names, as ngspice finds it: beside the file that names it, else from the current folder.
    The places looked at that held no file are added to ``absent``."""
    name = os.path.expanduser(word.strip("\"'"))
    for candidate in (os.path.join(here, name), os.path.abspath(name)):
        if os.path.isfile(candidate):
            return os.path.abspath(candidate)
        absent.append(candidate)
    raise _Unfollowed(f"no file {word}")


def _words(text: str) -> set[str]:
    """Every name-like word of ``text``, lower-case, binned names also without their bin suffix."""
    words = set(_WORD.findall(text.lower()))
    return words | {m[1] for w in words if (m := _BIN.match(w))}


def _section(statements: list[_Statement], section: str, path: str) -> list[_Statement]:
    """The statements of ``.lib SECTION`` ... ``.endl`` in a library file."""
    first = None
    for n, s in enumerate(statements):
        kw = s.kw
        if first is None and kw == ".lib" and s.words[1:] == (section,):
            first = n + 1
        elif first is not None and kw == ".endl":
            return statements[first:n]
    raise _Unfollowed(f"{path} has no section {section}")


_READS = (".include", ".inc", ".lib")
_READS_ANY = re.compile(r"^[ \t]*\.(?:include|inc|lib)\b", re.MULTILINE | re.IGNORECASE)
_NOT_FOLLOWED = (".lib", ".endl", ".end", ".control", ".endc")


@dataclass(slots=True)
class _Sources:
    """What a library line's items were read from: every file with the state it was read in, and the places a path word
    was looked for first that held no file (a file put there later would be read instead)."""

    files: dict[str, _Stamp] = field(default_factory=dict)
    absent: list[str] = field(default_factory=list)


def _read_out(s: _Statement, here: str, depth: int, seen: tuple[str, ...], sources: _Sources) -> list[_Item]:
    """The items an ``.include`` or ``.lib`` statement stands for: a comment saying where they come from, then those of
    the file (or of its section), its own such lines written out in turn."""
    kw, w = s.kw, s.words
    if len(w) != (3 if kw == ".lib" else 2):
        raise _Unfollowed(f"cannot follow {s.text[:80]!r}")
    path = _path(s.text.split(None, 2)[1] if kw == ".lib" else s.text.split(None, 1)[1].strip(), here, sources.absent)
    key = f"{path}\0{w[2] if kw == '.lib' else ''}"
    if key in seen:
        raise _Unfollowed(f"{path} includes itself")
    stamp, body = _read(path)
    sources.files.setdefault(path, stamp)  # the state first read: a change meanwhile is seen at the next deck
    if kw == ".lib":
        body = _section(body, w[2], path)
    return [_Item("* " + s.text.split("\n")[0].strip()), *_items(body, os.path.dirname(path), depth + 1, (*seen, key), sources)]


def _items(statements: list[_Statement], here: str, depth: int, seen: tuple[str, ...], sources: _Sources | None) -> list[_Item | _Library]:
    """The items of a file's statements, its .include and .lib lines written out: in the deck itself (depth 0) each as
    the _Library it reads, in a library item by item (the files read noted in ``sources``)."""
    if depth > 30:
        raise _Unfollowed("libraries nested too deep")
    items: list[_Item | _Library] = []
    i = 0
    while i < len(statements):
        s = statements[i]
        i += 1
        kw = s.kw
        if kw in _READS:
            if sources is None:
                items.append(_library(s, here))
            else:
                items.extend(_read_out(s, here, depth, seen, sources))
        elif kw in _NOT_FOLLOWED:
            raise _Unfollowed(f"{kw} in a library")
        elif kw == ".model":
            w = s.words
            if len(w) < 2:
                raise _Unfollowed("a .model card without a name")
            m = _BIN.match(w[1])
            items.append(_Item(s.text, m[1] if m else w[1], depth > 0))
        elif kw == ".subckt":
            w = s.words
            if len(w) < 2:
                raise _Unfollowed("a .subckt line without a name")
            block, level = [s.text], 1
            while level:
                if i >= len(statements):
                    raise _Unfollowed(f"no .ends for {w[1]}")
                b = statements[i]
                i += 1
                bk = b.kw
                if bk in _READS or bk in _NOT_FOLLOWED:
                    raise _Unfollowed(f"{bk} inside a subcircuit")
                level += (bk == ".subckt") - (bk == ".ends")
                block.append(b.text)
            items.append(_Item("\n".join(block), w[1], depth > 0))
        else:
            items.append(_Item(s.text, library=depth > 0))
    return items


def _joined(text: str) -> str:
    """The text with its continuation lines joined to the lines they continue, as ngspice joins them, when no line
    holds a comment ngspice would strip first (``;``, ``$``, ``//``); else as written."""
    if "+" not in text or ";" in text or "$" in text or "//" in text:
        return text
    return _CONTINUATION.sub(" ", text)


_DERIVED: dict[str, tuple[frozenset[str], str]] = {}  # a library item's text -> (its words, its text as written out)
_DERIVED_KEEP = 4096  # items kept at most (then forgotten all at once: a process reading many libraries in turn)


def _derived(item: _Item) -> tuple[frozenset[str], str]:
    """An item's words (_words) and its text as written out (_joined). Kept per process for the items of library files,
    which other library lines repeat (the sections of one process read the same device wrappers; a sky130 wrapper with
    its mismatch models is about 1 MB of text, whose words took most of the time this reading costs)."""
    if not item.library:
        return frozenset(_words(item.text)), _joined(item.text)
    hit = _DERIVED.get(item.text)
    if hit is None:
        if len(_DERIVED) >= _DERIVED_KEEP:
            _DERIVED.clear()
        hit = _DERIVED[item.text] = (frozenset(_words(item.text)), _joined(item.text))
    return hit


@dataclass(frozen=True, slots=True, eq=False)
class _Library:
    """What one ``.include`` or ``.lib`` line of a deck stands for, ready to be written out for any set of used names."""

    sources: _Sources
    texts: tuple[str, ...]  # each item as written out, the comment saying where they come from first
    names: tuple[str, ...]  # the name each item defines, "" for text kept as it is
    definitions: tuple[tuple[str, frozenset[str]], ...]  # (name, its words) of each definition
    text_words: frozenset[str]  # the words of the text kept as it is: a name among them is used
    defined: frozenset[str]  # the names it defines

    @classmethod
    def of(cls, items: list[_Item], sources: _Sources) -> _Library:
        """The library of these items, read from those sources."""
        derived = [_derived(item) for item in items]
        names = tuple(item.name for item in items)
        definitions = tuple((name, words) for name, (words, _) in zip(names, derived, strict=True) if name)
        text_words = frozenset().union(*(words for name, (words, _) in zip(names, derived, strict=True) if not name))
        return cls(sources, tuple(text for _, text in derived), names, definitions, text_words, frozenset(filter(None, names)))

    def unchanged(self) -> bool:
        """Whether every file it read is as it was then, and every place looked at first still holds no file."""
        for path, stamp in self.sources.files.items():
            try:
                st = os.stat(path)
            except OSError:
                return False
            if (st.st_mtime_ns, st.st_size) != stamp or not S_ISREG(st.st_mode):
                return False
        return not any(os.path.isfile(place) for place in self.sources.absent)

    def written_out(self, used: frozenset[str]) -> str:
        """Its lines with the definitions of the ``used`` names only."""
        return "\n".join([text for text, name in zip(self.texts, self.names, strict=True) if not name or name in used])


_LIBRARIES: dict[tuple[str, str, str, str], _Library] = {}  # (the line, its folder, current and home folders) -> library
_LIBRARIES_KEEP = 32  # library lines kept at most (then forgotten all at once)


def _library(s: _Statement, here: str) -> _Library:
    """The library a deck's ``.include`` or ``.lib`` line reads, kept per process while the files it read are unchanged:
    the samples of a statistical plan (one load a seed) and the corners of one process section repeat the line."""
    key = (s.text, here, os.getcwd(), os.path.expanduser("~"))  # all a path word's meaning depends on, besides the files
    library = _LIBRARIES.get(key)
    if library is None or not library.unchanged():
        sources = _Sources()
        library = _Library.of(_read_out(s, here, 0, (), sources), sources)
        if len(_LIBRARIES) >= _LIBRARIES_KEEP:
            _LIBRARIES.clear()
        _LIBRARIES[key] = library
    return library


_KEPT: dict[tuple, tuple[frozenset[str], tuple[str, ...]] | None] = {}  # (libraries, deck's definitions, its uses) -> kept
_KEPT_KEEP = 16  # written-out libraries kept at most (a sky130 one is MBs; forgotten all at once)


def _kept(own: list[_Item], libraries: tuple[_Library, ...]) -> tuple[frozenset[str], tuple[str, ...]] | None:
    """The names the circuit uses and each library written out with only those; None when it uses every name defined.
    Kept per process for decks whose own lines define and use the same names (a statistical plan's samples differ in
    their seed line only)."""
    definitions = tuple((item.name, frozenset(_words(item.text))) for item in own if item.name)
    own_names = {name for name, _ in definitions}
    words = _words("\n".join(item.text for item in own if not item.name))  # the words of the deck's own lines kept
    uses = words & own_names
    for library in libraries:
        uses |= words & library.defined
    key = (libraries, definitions, frozenset(uses))
    if key in _KEPT:
        return _KEPT[key]
    defined: dict[str, list[frozenset[str]]] = {}  # name -> the words of each of its definitions
    for name, item_words in (*definitions, *(d for library in libraries for d in library.definitions)):
        defined.setdefault(name, []).append(item_words)
    names = frozenset(defined)
    todo = [*uses, *(name for library in libraries for name in library.text_words & names)]
    used: set[str] = set()
    while todo:
        name = todo.pop()
        if name in used:
            continue
        used.add(name)
        for item_words in defined[name]:
            todo.extend((item_words & names) - used)
    kept = None  # every name used: nothing would be left out
    if used != names:
        kept = (frozen := frozenset(used)), tuple(library.written_out(frozen) for library in libraries)
    if len(_KEPT) >= _KEPT_KEEP:
        _KEPT.clear()
    _KEPT[key] = kept
    return kept


def used_only(deck: str, here: str) -> str | None:
    """``deck`` with its top-level ``.include`` and ``.lib`` lines written out, less the unused ``.model`` cards and
    ``.subckt`` blocks (see the module doc); ``here`` is the folder relative paths start from. None when the deck
    reads no library, when nothing would be left out, or when the libraries hold something not followed here."""
    pieces = used_pieces(deck, here)
    return None if pieces is None else "\n".join(pieces)


def used_pieces(deck: str, here: str) -> tuple[str, ...] | None:
    """used_only's deck in pieces of whole lines, whose join with newlines it is: the libraries written out are the
    same string objects for every deck that keeps the same names (``_kept``), so a loader can keep what it derives from
    them (netloop.sim.session.NgspiceSession.load)."""
    if not _READS_ANY.search(deck):
        return None
    title, _, rest = deck.partition("\n")
    end = re.search(r"^[ \t]*\.(?:control|end)\b", rest, flags=re.MULTILINE | re.IGNORECASE)
    body, tail = (rest[:end.start()], rest[end.start():]) if end else (rest, "")
    statements = _statements(body)
    if not any(s.kw in _READS for s in statements):
        return None
    try:
        pieces = _items(statements, os.path.abspath(here), 0, (), None)
    except (_Unfollowed, RecursionError):
        return None
    libraries = tuple(p for p in pieces if isinstance(p, _Library))
    kept = _kept([p for p in pieces if isinstance(p, _Item)], libraries)
    if kept is None:
        return None
    used, written = kept
    libraries_written = iter(written)  # each library's text, in the order of the lines that read them
    lines = []
    for piece in pieces:
        if isinstance(piece, _Library):
            lines.append(next(libraries_written))
        elif not piece.name or piece.name in used:
            lines.append(_joined(piece.text))
    return (title, *lines, tail.rstrip("\n"), "")


def warm(netlist: str) -> None:
    """Read the model libraries ``netlist`` names (statements kept for ``used_only``), before its deck arrives: a
    worker started ahead does this while its caller reads the netlist. Anything unreadable is left for later."""
    try:
        with open(netlist, encoding="utf-8", errors="replace") as fh:
            used_only(fh.read(), os.path.dirname(os.path.abspath(netlist)))
    except (OSError, ValueError):
        pass

