"""The parsed netlist: frozen records for elements, directives and subcircuits, each with its source location."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from types import MappingProxyType

from netloop.netlist.location import SourceLocation

__all__ = ["Directive", "Element", "Inclusion", "Netlist", "Statement", "Subcircuit"]


@dataclass(frozen=True, slots=True)
class Element:
    """One element card, continuation lines joined.

    ``tokens`` is everything after the name, verbatim except that node names are lower-cased
    (ngspice is case-insensitive). ``node_slots`` are the indices of ``tokens`` that hold node
    names, so that a node can be replaced without understanding the rest of the card;
    ``pins`` names the role of each slot ("p", "n" for two-terminal parts; "d", "g", "s", "b"
    for MOSFETs; "c", "b", "e", "sub" for BJTs; "cp", "cn" for controlling nodes of E/G and
    POLY forms; a subcircuit's own pin names for X lines).
    """

    name: str
    tokens: tuple[str, ...]
    node_slots: tuple[int, ...]
    pins: tuple[str, ...]
    location: SourceLocation
    model: str | None = None  # lower-case model or subcircuit name (D, M, Q, J, Z, X, ...), else None
    # ``nodes`` computed once (it is read in every pass over a large netlist); not an argument, never
    # compared, and not carried over by dataclasses.replace, so a copy with other tokens recomputes it
    _nodes: tuple[str, ...] | None = field(default=None, init=False, repr=False, compare=False)

    @property
    def kind(self) -> str:
        """The element letter, upper-case: 'R', 'M', 'X', ..."""
        return self.name[0].upper()

    @property
    def key(self) -> str:
        """The case-folded name used for lookups."""
        return self.name.lower()

    @property
    def nodes(self) -> tuple[str, ...]:
        """Node names in card order."""
        nodes = self._nodes
        if nodes is None:
            tokens = self.tokens
            nodes = tuple([tokens[i] for i in self.node_slots])
            object.__setattr__(self, "_nodes", nodes)
        return nodes

    @property
    def params(self) -> tuple[tuple[str, str], ...]:
        """``key=value`` tokens in card order (keys lower-cased, values verbatim)."""
        out = []
        for tok in self.tokens:
            if "=" in tok and not tok.startswith(("{", "'")):
                k, _, v = tok.partition("=")
                out.append((k.strip().lower(), v.strip()))
        return tuple(out)

    def with_nodes(self, nodes: tuple[str, ...]) -> Element:
        """A copy of this element with its node slots replaced, everything else unchanged."""
        if len(nodes) != len(self.node_slots):
            raise ValueError(f"{self.name}: expected {len(self.node_slots)} nodes, got {len(nodes)}")
        toks = list(self.tokens)
        for slot, node in zip(self.node_slots, nodes):
            toks[slot] = node
        return replace(self, tokens=tuple(toks))

    def renamed(self, name: str) -> Element:
        """A copy with another name (the letter must stay the same)."""
        if name[0].upper() != self.kind:
            raise ValueError(f"renaming {self.name} to {name} would change its kind")
        return replace(self, name=name)

    def card(self) -> str:
        """The element as one netlist line."""
        return " ".join((self.name, *self.tokens))


@dataclass(frozen=True, slots=True)
class Directive:
    """A dot statement kept verbatim (``.param``, ``.model``, ``.option``, ``.control`` blocks, ...).

    ``keyword`` is lower-case with its dot (".param"); ``text`` is the whole statement as one
    line (continuations joined), or for ``.control`` blocks the whole block with newlines.
    """

    keyword: str
    text: str
    location: SourceLocation


@dataclass(frozen=True, slots=True)
class Subcircuit:
    """A ``.subckt`` definition; ``body`` may hold nested subcircuits."""

    name: str  # lower-case
    pins: tuple[str, ...]  # lower-case node names
    params: tuple[tuple[str, str], ...]  # default parameters, keys lower-cased
    body: tuple[Statement, ...]
    location: SourceLocation
    header: str = ""  # the .subckt line as written, for messages

    @property
    def elements(self) -> tuple[Element, ...]:
        return tuple(s for s in self.body if isinstance(s, Element))

    @property
    def subcircuits(self) -> Mapping[str, Subcircuit]:
        return MappingProxyType({s.name: s for s in self.body if isinstance(s, Subcircuit)})


Statement = Element | Directive | Subcircuit


@dataclass(frozen=True, slots=True)
class Inclusion:
    """A top-level ``.include`` or ``.lib FILE SECTION`` and the statements it brought in, in order.

    The writer refers to the file again (instead of inlining it) when these very statements
    still stand unchanged, in this order, in the netlist being written.
    """

    kind: str  # "include" or "lib"
    path: str  # absolute path of the file read
    section: str | None  # library section (lower-case) for "lib"
    statements: tuple[Statement, ...]
    location: SourceLocation  # where the .include/.lib statement was
    clean: bool = True  # False when something in it was set aside (analyses, .control): never re-referenced


@dataclass(frozen=True, slots=True)
class Netlist:
    """A whole netlist: title, statements in order (includes resolved, library sections selected),
    and what was read to get there.

    ``ignored`` holds what netloop never runs: analyses (.op .ac .tran ...), output statements
    and ``.control`` blocks; they are not in ``statements``. ``caveats`` are the warnings that bear on what a verdict
    is about (netloop.netlist.caveats: the title line reads as an element, a ``.control`` block is left open or
    changes the circuit); they also lead ``warnings``. ``library_warnings`` are the warnings about library content
    the circuit does not instantiate, folded into one line at the end of ``warnings``.
    """

    title: str
    statements: tuple[Statement, ...]
    source: str  # the top file's path, or "<string>"
    ignored: tuple[Directive, ...] = ()
    files: tuple[str, ...] = ()  # every file read, top file first
    lib_sections: tuple[tuple[str, str], ...] = ()  # (file, section) pairs selected by .lib
    globals: tuple[str, ...] = ()  # .global nets, lower-case
    warnings: tuple[str, ...] = ()
    caveats: tuple[str, ...] = ()
    library_warnings: tuple[str, ...] = ()
    inclusions: tuple[Inclusion, ...] = field(default=(), compare=False)  # top-level includes, outer first
    _index: dict = field(default_factory=dict, repr=False, compare=False)

    @property
    def elements(self) -> tuple[Element, ...]:
        """Top-level elements (not inside subcircuit definitions)."""
        cached = self._index.get("element_tuple")
        if cached is None or cached[0] is not self.statements:  # a copy made with replace() may share _index
            cached = (self.statements, tuple([s for s in self.statements if isinstance(s, Element)]))
            self._index["element_tuple"] = cached
        return cached[1]

    @property
    def directives(self) -> tuple[Directive, ...]:
        return tuple(s for s in self.statements if isinstance(s, Directive))

    @property
    def subcircuits(self) -> Mapping[str, Subcircuit]:
        """Top-level subcircuit definitions by lower-case name."""
        sub = self._index.get("subcircuits")
        if sub is None:
            sub = MappingProxyType({s.name: s for s in self.statements if isinstance(s, Subcircuit)})
            self._index["subcircuits"] = sub
        return sub

    def subcircuit(self, name: str) -> Subcircuit:
        """The top-level subcircuit definition of that name (case-insensitive); UnknownNodeError suggests close names."""
        from netloop.errors import UnknownNodeError

        try:
            return self.subcircuits[name.lower()]
        except KeyError:
            raise UnknownNodeError("subcircuit", name, self.subcircuits) from None

    def element(self, name: str) -> Element:
        """The top-level element of that name (case-insensitive)."""
        from netloop.errors import UnknownNodeError

        by_key = self._index.get("elements")
        if by_key is None:
            by_key = {e.key: e for e in self.elements}
            self._index["elements"] = by_key
        try:
            return by_key[name.lower()]
        except KeyError:
            raise UnknownNodeError("element", name, by_key) from None
