"""The connectivity graph of a flattened circuit (networkx) and the supply nets held by voltage sources."""

from __future__ import annotations

from collections import deque
from collections.abc import Mapping
from types import MappingProxyType
from typing import TYPE_CHECKING

from netloop.netlist.reader import gc_paused

if TYPE_CHECKING:
    import networkx as nx

    from netloop.graph.flat import FlatCircuit

__all__ = ["connectivity_graph", "supply_nets"]


def connectivity_graph(circuit: FlatCircuit) -> nx.MultiGraph:
    """A multigraph whose nodes are nets; each element adds one edge per pair of its terminals.

    Edge key is ``(element name, pin, pin)``; attributes ``element``, ``kind`` and ``pins``
    (the pin on the first and on the second end, in the order the edge was added). An element
    with one terminal (or all terminals on one net) gives a self-loop.
    """
    import networkx as nx

    with gc_paused():  # a graph of a large circuit is millions of acyclic dicts: no collector passes
        return _build(nx.MultiGraph(), circuit)


def _build(g: nx.MultiGraph, circuit: FlatCircuit) -> nx.MultiGraph:
    g.add_nodes_from(circuit.nets)
    edges = []
    for name, kind, nodes, pins in zip(circuit.names, circuit.kinds, circuit.element_nodes, circuit.element_pins):
        k = len(nodes)
        if k == 2:
            edges.append((nodes[0], nodes[1], (name, pins[0], pins[1]), {"element": name, "kind": kind, "pins": (pins[0], pins[1])}))
        elif k == 1:
            edges.append((nodes[0], nodes[0], (name, pins[0], pins[0]), {"element": name, "kind": kind, "pins": (pins[0], pins[0])}))
        else:
            for a in range(k):
                for b in range(a + 1, k):
                    edges.append((nodes[a], nodes[b], (name, pins[a], pins[b]), {"element": name, "kind": kind, "pins": (pins[a], pins[b])}))
    g.add_edges_from(edges)
    return g


def supply_nets(circuit: FlatCircuit) -> Mapping[str, str]:
    """Nets tied to ground through independent voltage sources (directly or in a chain of them).

    Maps each such net to the name of the source that reaches it first from ground.
    """
    adj: dict[str, list[tuple[str, str]]] = {}
    for name, kind, nodes in zip(circuit.names, circuit.kinds, circuit.element_nodes):
        if kind == "V" and len(nodes) == 2 and nodes[0] != nodes[1]:
            a, b = nodes
            adj.setdefault(a, []).append((b, name))
            adj.setdefault(b, []).append((a, name))
    seen = set(circuit.ground)
    out: dict[str, str] = {}
    queue = deque(sorted(seen))
    while queue:
        net = queue.popleft()
        for other, src in adj.get(net, ()):
            if other not in seen:
                seen.add(other)
                out[other] = src
                queue.append(other)
    return MappingProxyType(out)
