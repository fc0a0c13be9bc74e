"""Find the feedback loops of a flattened circuit: strongly connected groups, their elementary loops, ranked break nodes.

The search runs on the signal-flow view (netloop.graph.signal_flow) as a designer reads a circuit
(netloop.graph.collapse): nodes joined by an independent voltage source are one vertex, one-ports
to a rail add nothing, and inside each strongly connected part a current mirror's input and a
pair's tail are looked through, so that a step of a loop is a stage. Every passive network is
collapsed to a hub (netloop.graph.passive_networks), so a large RC network costs one pass over
its elements and adds no cycles. The elementary cycles of each part (netloop.graph.cycles, with a
``length_bound``) are the loops, at most ``max_loops`` per group, and the group says when it was
capped. A cycle that only goes to a hub and back is a passive round trip, not a loop, and is
dropped. Every order (groups, loops, candidates) follows the circuit's order, never a set's.
"""

from __future__ import annotations

from itertools import islice
from typing import TYPE_CHECKING

from netloop.graph.break_points import rank_candidates, touching
from netloop.graph.collapse import SOURCE_PINS, Passage, Shorts, diode_nodes, look_through, series_shorts
from netloop.graph.cycles import bounded_cycles, strong_components
from netloop.graph.loop_records import Loop, LoopDiscovery, LoopGroup, Step
from netloop.graph.passive_networks import PassiveNetworks
from netloop.graph.signal_flow import cascode_diodes, element_edges, signal_nodes

if TYPE_CHECKING:
    from netloop.graph.flat import FlatCircuit

__all__ = ["DEFAULT_LENGTH_BOUND", "DEFAULT_MAX_LOOPS", "find_loops"]

DEFAULT_LENGTH_BOUND = 16  # vertices (nodes and passive hubs) per loop
DEFAULT_MAX_LOOPS = 200  # loops per group
_FAST_PASSIVE = frozenset("RCLD")


class _Hub(tuple):
    """A passive network's hub vertex: ("~", root node)."""

    __slots__ = ()


def _collect(circuit: FlatCircuit, signal: frozenset[str], shorts: Shorts):
    """Active edges (source vertex, target vertex) -> Passage, the passive networks (between vertices), and the ports."""
    active: dict[tuple[str, str], Passage] = {}
    nets = PassiveNetworks()
    ports: dict[str, None] = {}
    kinds, nodes_col = circuit.kinds, circuit.element_nodes
    names = circuit.names
    of = shorts.of
    pair = nets.pairs.append
    cascoded = cascode_diodes(circuit, signal)
    for i in range(len(kinds)):
        nodes = nodes_col[i]
        if kinds[i] in _FAST_PASSIVE and len(nodes) == 2:
            a, b = nodes
            if a in signal and b in signal and of(a) != of(b):
                pair((of(a), of(b), names[i]))
            continue
        for e in element_edges(circuit, i, signal, shorts.vertex, cascoded):
            a, b = of(e.source), of(e.target)
            if a == b:
                continue
            if e.passive:
                if e.source < e.target:
                    nets.join(a, b, e.element)
                continue
            # a pin the element does not have (a controlling node read by name: v(node) in an expression, an
            # F/H's sensing source, coupled inductors) meets the node by name: pin ""
            pin = e.source_pin if e.source_pin in circuit.element_pins[i] else ""
            hop = Passage.hop(e.element, pin, e.target_pin, e.source, e.target)
            if (a, b) in active:
                active[(a, b)].add(hop)
            else:
                active[(a, b)] = hop
            ports[a] = None
            ports[b] = None
    return active, nets, ports


def _key(order: dict[str, int]):
    def key(v) -> tuple[int, int]:
        return (1, order.get(v[1], 0)) if isinstance(v, _Hub) else (0, order.get(v, 0))
    return key


def _adjacency(active: dict[tuple[str, str], Passage], nets: PassiveNetworks, ports, order: dict[str, int]):
    """The vertices in circuit order and each one's successors in circuit order (active edges and hub links)."""
    key = _key(order)
    succ: dict[object, list] = {}
    for a, b in active:
        succ.setdefault(a, []).append(b)
        succ.setdefault(b, [])
    ordered_ports = sorted(ports, key=key)
    nets.label(ordered_ports)
    by_root: dict[str, list[str]] = {}
    for p in ordered_ports:
        by_root.setdefault(nets.find(p), []).append(p)
    for root, members in by_root.items():
        if len(members) < 2:
            continue
        hub = _Hub(("~", root))
        succ[hub] = list(members)
        for p in members:
            succ[p].append(hub)
    for v in succ:
        succ[v] = sorted(dict.fromkeys(succ[v]), key=key)
    return sorted(succ, key=key), succ


def _inner(comp: list, active: dict[tuple[str, str], Passage], succ, diodes: frozenset[str]) -> dict[str, bool]:
    """Which vertices of one component may be looked through: a mirror's input, or a node only sources/emitters touch."""
    members = set(comp)
    hub_ports = {v for v in comp if any(isinstance(w, _Hub) for w in succ.get(v, ()))}
    ins: dict[str, list[Passage]] = {}
    outs: dict[str, list[Passage]] = {}
    for (a, b), p in active.items():
        if a in members and b in members:
            outs.setdefault(a, []).append(p)
            ins.setdefault(b, []).append(p)
    out = {}
    for v in comp:
        if isinstance(v, _Hub) or v in hub_ports:
            continue
        if v in diodes:
            out[v] = True
            continue
        sources_only = all(t[1] in SOURCE_PINS for p in ins.get(v, ()) for t in p.enters) and all(
            t[1] in SOURCE_PINS for p in outs.get(v, ()) for t in p.leaves)
        out[v] = sources_only and bool(ins.get(v)) and bool(outs.get(v))
    return out


def _terminals_at(circuit: FlatCircuit, index: dict[str, int], elements, vertex: str, shorts: Shorts) -> tuple[tuple[str, str, str], ...]:
    """(element, pin, node) of ``elements`` on any node of ``vertex`` (``index``: element name -> position)."""
    want = shorts.nodes(vertex)
    out = []
    pins_col, nodes_col = circuit.element_pins, circuit.element_nodes
    for el in elements:
        i = index[el]
        out.extend((el, pin, n) for pin, n in zip(pins_col[i], nodes_col[i]) if n in want)
    return tuple(dict.fromkeys(out))


def _loop(circuit: FlatCircuit, index: dict[str, int], cycle: list, active, nets: PassiveNetworks, shorts: Shorts, key) -> Loop:
    """The Loop of a cycle of the collapsed graph."""
    k = min((i for i, v in enumerate(cycle) if not isinstance(v, _Hub)), key=lambda i: key(cycle[i]))
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
            opened.extend(shorts.nodes(a))
            for els, x, y in nets.passage(a, q):
                steps.append(Step(els, x, y, ("", ""), True, leaves=_terminals_at(circuit, index, els, x, shorts),
                                  enters=_terminals_at(circuit, index, els, y, shorts)))
            opened.extend(m for s in nets.separators(a, q) for m in shorts.nodes(s))
            i += 2
            continue
        p = active[(a, b)]
        opened.extend(shorts.nodes(a))
        steps.append(Step(tuple(p.elements), a, b, p.pins, False, leaves=tuple(p.leaves), enters=tuple(p.enters), through=tuple(p.through)))
        i += 1
    return Loop(tuple(steps), tuple(dict.fromkeys(opened)))


def _split(loops: tuple[Loop, ...]) -> list[list[Loop]]:
    """Loops joined by shared nodes (looked-through ones included), as separate lists (first-found order)."""
    owner: dict[str, int] = {}
    parent = list(range(len(loops)))

    def root(i: int) -> int:
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for i, lp in enumerate(loops):
        for n in lp.passes:
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
    network counts two); ``max_loops`` limits the loops listed per group. The result is the same
    under any hash seed.
    """
    if length_bound < 2 or max_loops < 1:
        raise ValueError("length_bound must be at least 2 and max_loops at least 1")
    signal = signal_nodes(circuit)
    shorts = series_shorts(circuit, signal)
    active, nets, ports = _collect(circuit, signal, shorts)
    order = {n: i for i, n in enumerate(circuit.nets)}
    key = _key(order)
    vertices, succ = _adjacency(active, nets, ports, order)
    diodes = diode_nodes(circuit, shorts, signal)
    index = {n: i for i, n in enumerate(circuit.names)}
    notes: list[str] = []
    found = []
    for comp in strong_components(succ, vertices):
        if len(comp) < 2 or all(isinstance(v, _Hub) for v in comp):
            continue
        inner = _inner(comp, active, succ, diodes)
        members = set(comp)
        edges = {ab: p for ab, p in active.items() if ab[0] in members and ab[1] in members}
        gone = set(look_through(edges, [v for v in comp if not isinstance(v, _Hub)], inner))
        kept = [v for v in comp if v not in gone]
        graph = {v: [w for w in succ[v] if w in members and w not in gone] for v in kept}
        for (a, b) in edges:
            if b not in graph[a]:
                graph[a].append(b)
        for v in graph:
            graph[v] = sorted(graph[v], key=key)

        def round_trip(c: list) -> bool:
            return len(c) == 2 and any(isinstance(v, _Hub) for v in c)

        cycles = bounded_cycles(graph, kept, length_bound, skip=round_trip)
        taken = list(islice(cycles, max_loops + 1))
        capped = len(taken) > max_loops
        taken = taken[:max_loops]
        if not taken:
            continue
        built = [_loop(circuit, index, c, edges, nets, shorts, key) for c in taken]
        parts = _split(tuple(built))
        component = len(found) if len(parts) > 1 else None  # one id for every part of this strongly connected component
        for loops in parts:
            found.append((tuple(sorted(loops, key=lambda lp: (len(lp.steps), lp.describe()))), capped, component))
    groups = []
    found.sort(key=lambda f: min(order.get(n, 0) for lp in f[0] for n in lp.passes))
    coupled: dict[int, list[int]] = {}
    every = {n for loops, _, _ in found for lp in loops for v in lp.passes for n in shorts.nodes(v)}
    elements_at = touching(circuit, every)
    for index, (loops, capped, component) in enumerate(found, 1):
        real = {n for lp in loops for v in lp.passes for n in shorts.nodes(v)}
        nodes = tuple(sorted(real, key=lambda n: order.get(n, 0)))
        through = tuple(sorted({n for lp in loops for s in lp.steps for n in s.through}, key=lambda n: order.get(n, 0)))
        merged = tuple(shorts.nodes(v) for v in sorted({v for lp in loops for v in lp.passes if v in shorts.members}, key=key))
        cands = rank_candidates(circuit, loops, signal, capped, elements_at, group_nodes=frozenset(real))
        groups.append(LoopGroup(index, nodes, loops, capped, cands, looked_through=through, merged=merged))
        if component is not None:
            coupled.setdefault(component, []).append(index)
        if capped:
            notes.append(f"loop group {index}: more than {max_loops} loops in its part of the circuit; only the first {max_loops} "
                         f"(up to {length_bound} vertices each) are listed")
    for members in coupled.values():
        notes.append(f"loop groups {', '.join(map(str, sorted(members)))} share no node, but reach one another through a passive network "
                     "(a signal path joining them crosses it twice): each is listed, broken and measured on its own, with the others closed")
    return LoopDiscovery(tuple(groups), len(signal), length_bound, max_loops, tuple(dict.fromkeys(notes)))
