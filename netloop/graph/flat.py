"""The flattened circuit: every primitive element with hierarchical names and the nets it touches."""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping
from dataclasses import dataclass, field
from itertools import chain
from types import MappingProxyType

from netloop.errors import UnknownNodeError
from netloop.netlist.cards import controlling_sources
from netloop.netlist.model import Element

__all__ = ["GROUND_NAMES", "FlatCircuit", "FlatElement", "Net", "Terminal"]

GROUND_NAMES = ("0", "gnd")


def _candidates(name: str, known, limit: int = 5000):
    """Names worth comparing with ``name`` for suggestions; keeps difflib quick on huge circuits."""
    if len(known) <= limit:
        return known
    n = len(name)
    near = [k for k in known if abs(len(k) - n) <= 2]
    p = 0
    while len(near) > limit and p < n:  # narrow to names sharing a longer and longer prefix
        p += 1
        narrower = [k for k in near if k[:p] == name[:p]]
        if not narrower:
            break
        near = narrower
    return near[:limit]


@dataclass(frozen=True, slots=True)
class FlatElement:
    """One primitive after flattening: ``name`` is hierarchical and lower-case (``xa.xb.m1``)."""

    name: str
    kind: str  # element letter; a device-wrapper X instance has its device's letter ("M", "Q", ...)
    nodes: tuple[str, ...]  # flattened nets, in the order of ``pins``
    pins: tuple[str, ...]
    element: Element  # the card it comes from (for a device wrapper: the X card)
    path: tuple[str, ...]  # instance names from the top, lower-case ("xa", "xb")
    subcircuit: str | None = None  # the device-wrapper subcircuit this X instance stands for

    @property
    def model(self) -> str | None:
        """Model name, or for a device-wrapper instance the wrapper's subcircuit name."""
        return self.element.model

    @property
    def is_wrapped_device(self) -> bool:
        return self.subcircuit is not None

    @property
    def controlling_sources(self) -> tuple[str, ...]:
        """Hierarchical names of the voltage sources whose current controls this F, H or W element."""
        prefix = "".join(p + "." for p in self.path)
        return tuple(prefix + v for v in controlling_sources(self.element))


@dataclass(frozen=True, slots=True)
class Terminal:
    """One connection of a net: which element and which of its pins."""

    element: str  # hierarchical element name
    pin: str
    index: int  # position of the element in FlatCircuit


@dataclass(frozen=True, slots=True)
class Net:
    """A flattened net and every terminal on it."""

    name: str
    terminals: tuple[Terminal, ...]


@dataclass(frozen=True, slots=True)
class FlatCircuit:
    """The whole hierarchy expanded, stored column-wise (one entry per element in each tuple).

    Columns keep a million-element circuit compact; ``elements`` builds the record view on demand.
    """

    names: tuple[str, ...]
    kinds: tuple[str, ...]
    element_nodes: tuple[tuple[str, ...], ...]
    element_pins: tuple[tuple[str, ...], ...]
    originals: tuple[Element, ...]
    paths: tuple[tuple[str, ...], ...]
    wrappers: tuple[str | None, ...]
    globals: tuple[str, ...] = ()
    instance_counts: Mapping[str, int] = field(default_factory=dict)  # subcircuit -> X instances, all levels
    warnings: tuple[str, ...] = ()
    # (path, the subcircuit's pin names, the nets on them) of every expanded X instance, in circuit order
    instance_pins: tuple[tuple[tuple[str, ...], tuple[str, ...], tuple[str, ...]], ...] = ()
    _cache: dict = field(default_factory=dict, repr=False, compare=False)

    def __len__(self) -> int:
        return len(self.names)

    # -- elements ------------------------------------------------------------------------
    @property
    def elements(self) -> tuple[FlatElement, ...]:
        got = self._cache.get("elements")
        if got is None:
            got = tuple(map(FlatElement, self.names, self.kinds, self.element_nodes, self.element_pins, self.originals, self.paths, self.wrappers))
            self._cache["elements"] = got
        return got

    def _element_index(self) -> dict[str, int]:
        got = self._cache.get("element_index")
        if got is None:
            got = {n: i for i, n in enumerate(self.names)}
            self._cache["element_index"] = got
        return got

    def element(self, name: str) -> FlatElement:
        """The flattened element of that hierarchical name (case-insensitive)."""
        idx = self._element_index()
        try:
            i = idx[name.lower()]
        except KeyError:
            raise UnknownNodeError("element", name, _candidates(name.lower(), idx)) from None
        return FlatElement(self.names[i], self.kinds[i], self.element_nodes[i], self.element_pins[i], self.originals[i], self.paths[i], self.wrappers[i])

    def by_kind(self) -> Mapping[str, int]:
        """Element count per kind letter, sorted by letter."""
        counts = Counter(self.kinds)
        return MappingProxyType(dict(sorted(counts.items())))

    # -- nets ----------------------------------------------------------------------------
    def connection_counts(self) -> Mapping[str, int]:
        """How many terminals each net has (every net, ground included), in first-seen order."""
        got = self._cache.get("counts")
        if got is None:
            got = Counter(chain.from_iterable(self.element_nodes))
            self._cache["counts"] = got
        return MappingProxyType(got)

    @property
    def nets(self) -> tuple[str, ...]:
        """Every net, ground included, in first-seen order."""
        got = self._cache.get("nets")
        if got is None:
            got = tuple(self.connection_counts())
            self._cache["nets"] = got
        return got

    @property
    def ground(self) -> tuple[str, ...]:
        """The ground net, ``("0",)``, when present (flattening renames ``gnd`` to ``0`` as ngspice does)."""
        counts = self.connection_counts()
        return tuple(g for g in GROUND_NAMES if g in counts)

    def is_ground(self, net: str) -> bool:
        return net.lower() in GROUND_NAMES

    @property
    def node_count(self) -> int:
        """Number of nets, ground excluded."""
        return len(self.connection_counts()) - len(self.ground)

    def _adjacency(self) -> dict[str, list[int]]:
        got = self._cache.get("adjacency")
        if got is None:
            got = {}
            for i, nodes in enumerate(self.element_nodes):
                for n in nodes:
                    lst = got.get(n)
                    if lst is None:
                        got[n] = [i]
                    elif lst[-1] != i:
                        lst.append(i)
            self._cache["adjacency"] = got
        return got

    def terminals(self, net: str) -> tuple[Terminal, ...]:
        """Every element terminal on ``net`` (case-insensitive); UnknownNodeError suggests close names."""
        key = net.lower()
        if key == "gnd":
            key = "0"
        adj = self._adjacency()
        if key not in adj:
            raise UnknownNodeError("node", net, _candidates(key, adj))
        out = []
        for i in adj[key]:
            for n, pin in zip(self.element_nodes[i], self.element_pins[i]):
                if n == key:
                    out.append(Terminal(self.names[i], pin, i))
        return tuple(out)

    def node(self, name: str) -> Net:
        """The net of that flattened name with its terminals; UnknownNodeError suggests close names."""
        terminals = self.terminals(name)
        key = name.lower()
        return Net("0" if key == "gnd" else key, terminals)
