"""One-ports and zero-impedance series elements collapsed before loops are enumerated: the loops a designer names.

A transistor-level loop group lists every route a signal can take, and most of the routes differ
only inside a stage: through a pair's tail or straight to the drain, through a mirror's diode or
not. Every mirror and every pair doubles the elementary loops, so a regulator's group counts them
by the hundred while its designer names two or three. Three rules bring the count to that level
(each is the small-signal view of the circuit, not an approximation of it):

- **Zero-impedance series elements are one node.** An independent voltage source between two
  signal nodes (a 0 V source that senses a current, a level shift) is a short for AC: its two
  nodes are one vertex of the signal-flow graph (``Shorts``), named by the first in circuit order,
  and a break at either of them is a break of that vertex. A transistor whose gate reaches its
  drain through such a source is diode-connected.
- **One-ports add no loop.** A diode-connected transistor is a two-terminal device; between a node
  and a rail it is, like a resistor, capacitor or current source to a rail, a shunt that only sets
  the node's impedance (netloop.graph.signal_flow gives it no edge).
- **Nodes inside a stage are looked through.** In a loop group, a node held by a diode-connected
  transistor to a rail (a current mirror's input) and a node that only transistors' sources or
  emitters touch (a pair's tail) are passed through: each route in and each route out become one
  step from the node before to the node after (``look_through``). The step keeps the elements
  and the nodes it passes (``Step.through``), so nothing is lost, and the designer's loops remain:
  a two-stage op-amp has its global loop, its Miller loop and the loop through the Miller capacitor
  instead of seven. A node is kept when looking through it would close a loop on itself (a
  beta-multiplier's two diodes are its whole loop) or when it is a port of a passive network.
  Looked-through nodes are not offered as break candidates: a break there opens only the routes
  through it (``check --at`` still breaks them when asked).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from netloop.graph.flat import FlatCircuit

__all__ = ["Passage", "Shorts", "diode_nodes", "look_through", "series_shorts"]

_CHANNEL = {"M": ("g", "d", "s"), "J": ("g", "d", "s"), "Z": ("g", "d", "s"), "Q": ("b", "c", "e")}
SOURCE_PINS = frozenset(("s", "e"))


@dataclass(frozen=True, slots=True)
class Shorts:
    """Signal nodes joined by independent voltage sources (AC shorts): each node's vertex and each vertex's nodes."""

    vertex: Mapping[str, str]  # node -> the vertex standing for it (the first of its nodes in circuit order); only merged nodes
    members: Mapping[str, tuple[str, ...]]  # vertex -> its nodes in circuit order; only vertices of two nodes or more
    sources: Mapping[str, tuple[tuple[str, str, str, str], ...]]  # node -> (source, its pin here, other node, other pin)

    def of(self, node: str) -> str:
        """The vertex of ``node`` (the node itself when it is joined to no other)."""
        return self.vertex.get(node, node)

    def nodes(self, vertex: str) -> tuple[str, ...]:
        """Every node a vertex stands for."""
        return self.members.get(vertex, (vertex,))

    def way(self, node: str, to: str) -> tuple[str, str] | None:
        """The (source, pin) at ``node`` of the first series source on the way from ``node`` to ``to`` (None if ``to`` is ``node``)."""
        if node == to:
            return None
        first: dict[str, tuple[str, str]] = {}
        todo = [node]
        seen = {node}
        while todo:
            here = todo.pop(0)
            for src, pin, other, _ in self.sources.get(here, ()):
                if other in seen:
                    continue
                seen.add(other)
                first[other] = first.get(here) or (src, pin)
                if other == to:
                    return first[other]
                todo.append(other)
        return None


def series_shorts(circuit: FlatCircuit, signal: frozenset[str]) -> Shorts:
    """The nodes joined by independent voltage sources between two signal nodes (cached on the circuit)."""
    key = ("series_shorts", signal)
    got = circuit._cache.get(key)
    if got is not None:
        return got
    order = {n: i for i, n in enumerate(circuit.nets)}
    sources: dict[str, list[tuple[str, str, str, str]]] = {}
    for name, kind, nodes, pins in zip(circuit.names, circuit.kinds, circuit.element_nodes, circuit.element_pins):
        if kind == "V" and len(nodes) == 2 and nodes[0] != nodes[1] and nodes[0] in signal and nodes[1] in signal:
            (a, b), (pa, pb) = nodes, pins[:2]
            sources.setdefault(a, []).append((name, pa, b, pb))
            sources.setdefault(b, []).append((name, pb, a, pa))
    vertex: dict[str, str] = {}
    members: dict[str, tuple[str, ...]] = {}
    for start in sorted(sources, key=lambda n: order.get(n, 0)):
        if start in vertex:
            continue
        part = [start]
        seen = {start}
        for here in part:
            for _, _, other, _ in sources[here]:
                if other not in seen:
                    seen.add(other)
                    part.append(other)
        part.sort(key=lambda n: order.get(n, 0))
        members[part[0]] = tuple(part)
        for n in part:
            vertex[n] = part[0]
    got = Shorts(vertex, members, {n: tuple(v) for n, v in sources.items()})
    circuit._cache[key] = got
    return got


@dataclass(slots=True)
class Passage:
    """Every way from one vertex to another, gathered: the elements, the terminals it leaves and enters by, the nodes passed.

    Terminals are (element, pin, real node); ``pins`` are the first element's pins at the two ends.
    Insertion-ordered dicts serve as ordered sets.
    """

    elements: dict[str, None]
    leaves: dict[tuple[str, str, str], None]
    enters: dict[tuple[str, str, str], None]
    through: dict[str, None]
    pins: tuple[str, str]

    @classmethod
    def hop(cls, element: str, source_pin: str, target_pin: str, source_node: str, target_node: str) -> Passage:
        return cls({element: None}, {(element, source_pin, source_node): None}, {(element, target_pin, target_node): None}, {}, (source_pin, target_pin))

    def add(self, other: Passage) -> None:
        """Gather a parallel way between the same two vertices."""
        for mine, theirs in ((self.elements, other.elements), (self.leaves, other.leaves), (self.enters, other.enters),
                             (self.through, other.through)):
            mine.update(theirs)

    def then(self, other: Passage, via: str) -> Passage:
        """This way, then ``other``, passing vertex ``via``."""
        return Passage({**self.elements, **other.elements}, dict(self.leaves), dict(other.enters),
                       {**self.through, via: None, **other.through}, (self.pins[0], other.pins[1]))


def diode_nodes(circuit: FlatCircuit, shorts: Shorts, signal: frozenset[str]) -> frozenset[str]:
    """Vertices held by a diode-connected transistor whose other channel end is a rail (a mirror's input)."""
    out = set()
    for kind, nodes, pins in zip(circuit.kinds, circuit.element_nodes, circuit.element_pins):
        roles = _CHANNEL.get(kind)
        if roles is None:
            continue
        at = dict(zip(pins, nodes))
        control, output, other = (at.get(p) for p in roles)
        if control is None or output is None or shorts.of(control) != shorts.of(output):
            continue
        if output in signal and (other is None or other not in signal):
            out.add(shorts.of(output))
    return frozenset(out)


def look_through(edges: dict[tuple[str, str], Passage], vertices: Sequence[str], inner: Mapping[str, bool]) -> list[str]:
    """Pass through the looked-through candidates among ``vertices`` (in that order), rewriting ``edges`` in place.

    ``edges`` maps (source vertex, target vertex) to its Passage, between the vertices of one
    strongly connected component; ``inner[v]`` says whether ``v`` may be looked through (see the
    module docstring). A vertex whose predecessors and successors share a vertex is kept (looking
    through it would close that loop on itself). Returns the vertices looked through, in order.
    """
    succ: dict[str, dict[str, None]] = {v: {} for v in vertices}
    pred: dict[str, dict[str, None]] = {v: {} for v in vertices}
    for a, b in edges:
        succ[a][b] = None
        pred[b][a] = None
    gone = []
    for v in vertices:
        if not inner.get(v):
            continue
        ins, outs = list(pred[v]), list(succ[v])
        if not ins or not outs or set(ins) & set(outs):
            continue
        for a in ins:
            for b in outs:
                joined = edges[(a, v)].then(edges[(v, b)], v)
                if (a, b) in edges:
                    edges[(a, b)].add(joined)
                else:
                    edges[(a, b)] = joined
                    succ[a][b] = None
                    pred[b][a] = None
        for a in ins:
            del edges[(a, v)]
            del succ[a][v]
        for b in outs:
            del edges[(v, b)]
            del pred[b][v]
        del succ[v], pred[v]
        gone.append(v)
    return gone
