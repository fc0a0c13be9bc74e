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

A process keeps what it read of each library file while the file is unchanged, and the words and the
written-out text of each library item (``_derived``): a worker that loads the same libraries again (a
statistical plan's samples, one load a seed; corners of one process section) repeats only the deck's
own lines. The sky130 Miller buffer at ``tt_mm`` took about 85 ms of Python a load for this reading,
about 3 ms with the items kept.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass

__all__ = ["used_only", "warm"]

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


_FILES: dict[str, tuple[tuple[int, int], list[_Statement]]] = {}  # path -> ((mtime_ns, size), statements)


def _read(path: str) -> list[_Statement]:
    """The statements of a library file, kept per process while the file is unchanged (corner workers load it often)."""
    try:
        st = os.stat(path)
        stamp = (st.st_mtime_ns, st.st_size)
        hit = _FILES.get(path)
        if hit is not None and hit[0] == stamp:
            return hit[1]
        with open(path, encoding="utf-8", errors="replace") as fh:
            statements = _statements(fh.read())
    except OSError as exc:
        raise _Unfollowed(str(exc)) from exc
    _FILES[path] = (stamp, statements)
    return statements


def _path(word: str, here: str) -> str:
    """The file a path word names, as ngspice finds it: beside the file that names it, else from the current folder."""
    name = os.path.expanduser(word.strip("\"'"))
    for candidate in (os.path.join(here, name), os.path.abspath(name)):
        if os.path.isfile(candidate):
            return os.path.abspath(candidate)
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


def _items(statements: list[_Statement], here: str, depth: int, seen: tuple[str, ...]) -> list[_Item]:
    """The items of a file's statements, its .include and .lib lines written out."""
    if depth > 30:
        raise _Unfollowed("libraries nested too deep")
    items: list[_Item] = []
    i = 0
    while i < len(statements):
        s = statements[i]
        i += 1
        kw = s.kw
        if kw in _READS:
            w = s.words
            if len(w) != (3 if kw == ".lib" else 2):
                raise _Unfollowed(f"cannot follow {s.text[:80]!r}")
            path = _path(s.text.split(None, 2)[1] if kw == ".lib" else s.text.split(None, 1)[1].strip(), here)
            key = f"{path}\0{w[2] if kw == '.lib' else ''}"
            if key in seen:
                raise _Unfollowed(f"{path} includes itself")
            body = _read(path)
            if kw == ".lib":
                body = _section(body, w[2], path)
            items.append(_Item("* " + s.text.split("\n")[0].strip()))  # where the lines below come from
            items.extend(_items(body, os.path.dirname(path), depth + 1, (*seen, key)))
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
    """An item's words (_words) and its text as written out (_joined). Kept per process for the items of library files:
    every deck that reads the same library repeats them (the samples of a statistical plan, one load each, read the same
    cards; a sky130 device wrapper with its mismatch models is about 1 MB of text, whose words took most of the time
    this reading costs)."""
    if not item.library:
        return frozenset(_words(item.text)), _joined(item.text)
    hit = _DERIVED.get(item.text)
    if hit is None:
        if len(_DERIVED) >= _DERIVED_KEEP:
            _DERIVED.clear()
        hit = _DERIVED[item.text] = (frozenset(_words(item.text)), _joined(item.text))
    return hit


def used_only(deck: str, here: str) -> str | None:
    """``deck`` with its top-level ``.include`` and ``.lib`` lines written out, less the unused ``.model`` cards and
    ``.subckt`` blocks (see the module doc); ``here`` is the folder relative paths start from. None when the deck
    reads no library, when nothing would be left out, or when the libraries hold something not followed here."""
    if not _READS_ANY.search(deck):
        return None
    title, _, rest = deck.partition("\n")
    end = re.search(r"^[ \t]*\.(?:control|end)\b", rest, flags=re.MULTILINE | re.IGNORECASE)
    body, tail = (rest[:end.start()], rest[end.start():]) if end else (rest, "")
    statements = _statements(body)
    if not any(s.kw in _READS for s in statements):
        return None
    try:
        items = _items(statements, os.path.abspath(here), 0, ())
    except (_Unfollowed, RecursionError):
        return None
    defined: dict[str, list[_Item]] = {}
    for item in items:
        if item.name:
            defined.setdefault(item.name, []).append(item)
    names = set(defined)
    used: set[str] = set()
    todo = [name for item in items if not item.name for name in _derived(item)[0] & names]  # the words of the lines kept
    while todo:
        name = todo.pop()
        if name in used:
            continue
        used.add(name)
        for item in defined[name]:
            todo.extend((_derived(item)[0] & names) - used)
    if all(name in used for name in defined):
        return None
    kept = [_derived(item)[1] for item in items if not item.name or item.name in used]
    return "\n".join([title, *kept, tail.rstrip("\n")]) + "\n"


def warm(netlist: str) -> None:
    """Read the model libraries ``netlist`` names (statements kept for ``used_only``), before its deck arrives: a
    worker started ahead does this while its caller reads the netlist. Anything unreadable is left for later."""
    try:
        with open(netlist, encoding="utf-8", errors="replace") as fh:
            used_only(fh.read(), os.path.dirname(os.path.abspath(netlist)))
    except (OSError, ValueError):
        pass
