"""Find the feedback loops of a flattened circuit: strongly connected groups, their elementary loops, ranked break nodes.

The search runs on the signal-flow view (netloop.graph.signal_flow) with every passive network
collapsed to a hub (netloop.graph.passive_networks), so a large RC network costs one pass over
its elements and adds no cycles. Strongly connected components of that graph are the loop groups;
their elementary cycles (networkx ``simple_cycles`` with a ``length_bound``) are the loops, at
most ``max_loops`` per group, and the group says when it was capped. A cycle that only goes to a
hub and back is a passive round trip, not a loop, and is dropped.
"""

from __future__ import annotations

from itertools import islice
from typing import TYPE_CHECKING

from netloop.graph.break_points import rank_candidates, touching
from netloop.graph.loop_records import Loop, LoopDiscovery, LoopGroup, Step
from netloop.graph.passive_networks import PassiveNetworks
from netloop.graph.signal_flow import element_edges, signal_nodes

if TYPE_CHECKING:
    from netloop.graph.flat import FlatCircuit

__all__ = ["DEFAULT_LENGTH_BOUND", "DEFAULT_MAX_LOOPS", "find_loops"]

DEFAULT_LENGTH_BOUND = 16  # vertices (nodes and passive hubs) per loop
DEFAULT_MAX_LOOPS = 200  # loops per group
_FAST_PASSIVE = frozenset("RCLD")


class _Hub(tuple):
    """A passive network's hub vertex: ("~", root node)."""

    __slots__ = ()


def _collect(circuit: FlatCircuit, signal: frozenset[str]):
    """Active edges (source, target) -> [(element, pin, pin)], and the passive networks."""
    active: dict[tuple[str, str], list[tuple[str, str, str]]] = {}
    nets = PassiveNetworks()
    ports: set[str] = set()
    kinds, nodes_col = circuit.kinds, circuit.element_nodes
    names = circuit.names
    pair = nets.pairs.append
    for i in range(len(kinds)):
        nodes = nodes_col[i]
        if kinds[i] in _FAST_PASSIVE and len(nodes) == 2:
            a, b = nodes
            if a != b and a in signal and b in signal:
                pair((a, b, names[i]))
            continue
        for e in element_edges(circuit, i, signal):
            if e.passive:
                if e.source < e.target:
                    nets.join(e.source, e.target, e.element)
            else:
                active.setdefault((e.source, e.target), []).append((e.element, e.source_pin, e.target_pin))
                ports.add(e.source)
                ports.add(e.target)
    return active, nets, ports


def _graph(active, nets: PassiveNetworks, ports: set[str]):
    import networkx as nx

    g = nx.DiGraph()
    g.add_edges_from(active)
    nets.label(sorted(ports))
    by_root: dict[str, list[str]] = {}
    for p in ports:
        by_root.setdefault(nets.find(p), []).append(p)
    for root, members in by_root.items():
        if len(members) < 2:
            continue
        hub = _Hub(("~", root))
        for p in members:
            g.add_edge(p, hub)
            g.add_edge(hub, p)
    return g


def _loop(cycle: list, active, nets: PassiveNetworks, order: dict[str, int]) -> Loop:
    """The Loop of a cycle of the collapsed graph."""
    k = min((i for i, v in enumerate(cycle) if not isinstance(v, _Hub)), key=lambda i: order.get(cycle[i], 0))
    cycle = cycle[k:] + cycle[:k]
    steps: list[Step] = []
    opened: list[str] = []
    n = len(cycle)
    i = 0
    while i < n:
        a = cycle[i]
        b = cycle[(i + 1) % n]
        if isinstance(b, _Hub):
            q = cycle[(i + 2) % n]
            opened.append(a)
            for els, x, y in nets.passage(a, q):
                steps.append(Step(els, x, y, ("", ""), True))
            opened.extend(nets.separators(a, q))
            i += 2
            continue
        par = active[(a, b)]
        opened.append(a)
        steps.append(Step(tuple(dict.fromkeys(e for e, _, _ in par)), a, b, (par[0][1], par[0][2]), False))
        i += 1
    return Loop(tuple(steps), tuple(dict.fromkeys(opened)))


def _split(loops: tuple[Loop, ...]) -> list[list[Loop]]:
    """Loops joined by shared nodes, as separate lists (first-found order)."""
    owner: dict[str, int] = {}
    parent = list(range(len(loops)))

    def root(i: int) -> int:
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for i, lp in enumerate(loops):
        for n in lp.nodes:
            j = owner.setdefault(n, i)
            if j != i:
                parent[root(i)] = root(j)
    parts: dict[int, list[Loop]] = {}
    for i, lp in enumerate(loops):
        parts.setdefault(root(i), []).append(lp)
    return list(parts.values())


def find_loops(circuit: FlatCircuit, *, length_bound: int = DEFAULT_LENGTH_BOUND, max_loops: int = DEFAULT_MAX_LOOPS) -> LoopDiscovery:
    """Every loop group of the circuit with its loops (bounded) and its break candidates ranked.

    ``length_bound`` limits the vertices of a loop in the collapsed graph (a crossing of a passive
    network counts two); ``max_loops`` limits the loops listed per group.
    """
    import networkx as nx

    if length_bound < 2 or max_loops < 1:
        raise ValueError("length_bound must be at least 2 and max_loops at least 1")
    signal = signal_nodes(circuit)
    active, nets, ports = _collect(circuit, signal)
    g = _graph(active, nets, ports)
    order = {n: i for i, n in enumerate(circuit.nets)}
    notes: list[str] = []
    found = []
    for comp in nx.strongly_connected_components(g):
        if len(comp) < 2 or all(isinstance(v, _Hub) for v in comp):
            continue
        sub = g.subgraph(comp)
        cycles = (c for c in nx.simple_cycles(sub, length_bound=length_bound) if not (len(c) == 2 and any(isinstance(v, _Hub) for v in c)))
        taken = list(islice(cycles, max_loops + 1))
        capped = len(taken) > max_loops
        taken = taken[:max_loops]
        if not taken:
            continue
        built = [_loop(c, active, nets, order) for c in taken]
        parts = _split(tuple(built))
        for loops in parts:
            found.append((tuple(sorted(loops, key=lambda lp: (len(lp.steps), lp.describe()))), capped, len(found) if len(parts) > 1 else None))
    groups = []
    found.sort(key=lambda f: min(order.get(n, 0) for lp in f[0] for n in lp.nodes))
    coupled: dict[int, list[int]] = {}
    elements_at = touching(circuit, {n for loops, _, _ in found for lp in loops for n in lp.nodes})
    for index, (loops, capped, component) in enumerate(found, 1):
        nodes = tuple(sorted({n for lp in loops for n in lp.nodes}, key=lambda n: order.get(n, 0)))
        cands = rank_candidates(circuit, loops, signal, capped, elements_at)
        groups.append(LoopGroup(index, nodes, loops, capped, cands))
        if component is not None:
            coupled.setdefault(component, []).append(index)
        if capped:
            notes.append(f"loop group {index}: more than {max_loops} loops in its part of the circuit; only the first {max_loops} "
                         f"(up to {length_bound} vertices each) are listed")
    for members in coupled.values():
        notes.append(f"loop groups {', '.join(map(str, sorted(members)))} share no node, but reach one another through a passive network "
                     "(a signal path joining them crosses it twice): each is listed, broken and measured on its own, with the others closed")
    return LoopDiscovery(tuple(groups), len(signal), length_bound, max_loops, tuple(dict.fromkeys(notes)))
