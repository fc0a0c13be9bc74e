"""Strongly connected components and bounded elementary cycles of a small directed graph, in a fixed order.

The graph is a plain mapping ``vertex -> successors`` whose successor lists are already in the
order the caller wants (netloop.graph.loops sorts them by circuit order). Nothing here iterates a
set or picks an arbitrary element, so the components and the cycles, and the order they come in,
are the same under any PYTHONHASHSEED (networkx's ``simple_cycles`` picks its start vertex from a
set and walks subgraph views whose iteration can follow a set, so a capped enumeration could
list different loops from one run to the next).

Components: Tarjan's algorithm (1972), iterative. Cycles: the bounded search of Gupta and
Suzumura ("Finding All Bounded-Length Simple Cycles in a Directed Graph", 2021), the algorithm
networkx implements, run from the first vertex of each component in the given vertex order, then
on the components of what remains once that vertex is removed.
"""

from __future__ import annotations

from collections.abc import Callable, Hashable, Iterator, Mapping, Sequence

__all__ = ["bounded_cycles", "strong_components"]

Graph = Mapping[Hashable, Sequence[Hashable]]


def strong_components(graph: Graph, vertices: Sequence[Hashable]) -> list[list[Hashable]]:
    """The strongly connected components among ``vertices`` (edges leaving them ignored), each in ``vertices`` order.

    Components come in the order of their first vertex in ``vertices``.
    """
    allowed = set(vertices)
    index: dict[Hashable, int] = {}
    low: dict[Hashable, int] = {}
    on_stack: set[Hashable] = set()
    stack: list[Hashable] = []
    found: list[list[Hashable]] = []
    counter = 0
    for root in vertices:
        if root in index:
            continue
        index[root] = low[root] = counter
        counter += 1
        stack.append(root)
        on_stack.add(root)
        frames = [(root, iter(graph.get(root, ())))]
        while frames:
            v, it = frames[-1]
            for w in it:
                if w not in allowed:
                    continue
                if w not in index:
                    index[w] = low[w] = counter
                    counter += 1
                    stack.append(w)
                    on_stack.add(w)
                    frames.append((w, iter(graph.get(w, ()))))
                    break
                if w in on_stack and index[w] < low[v]:
                    low[v] = index[w]
            else:
                frames.pop()
                if frames:
                    u = frames[-1][0]
                    if low[v] < low[u]:
                        low[u] = low[v]
                if low[v] == index[v]:
                    comp = []
                    while True:
                        x = stack.pop()
                        on_stack.discard(x)
                        comp.append(x)
                        if x == v:
                            break
                    found.append(comp)
    position = {v: i for i, v in enumerate(vertices)}
    comps = [sorted(c, key=position.__getitem__) for c in found]
    comps.sort(key=lambda c: position[c[0]])
    return comps


def _cycles_through(graph: Graph, allowed: set[Hashable], start: Hashable, length_bound: int) -> Iterator[list[Hashable]]:
    """Every simple cycle through ``start`` within ``allowed`` of at most ``length_bound`` vertices (Gupta and Suzumura)."""
    path = [start]
    lock: dict[Hashable, int] = {start: 0}
    blocked_by: dict[Hashable, dict[Hashable, None]] = {}
    stack = [iter(graph.get(start, ()))]
    blen = [length_bound]
    while stack:
        for w in stack[-1]:
            if w not in allowed:
                continue
            if w == start:
                yield path[:]
                blen[-1] = 1
            elif len(path) < lock.get(w, length_bound):
                path.append(w)
                blen.append(length_bound)
                lock[w] = len(path)
                stack.append(iter(graph.get(w, ())))
                break
        else:
            stack.pop()
            v = path.pop()
            bl = blen.pop()
            if blen:
                blen[-1] = min(blen[-1], bl)
            if bl < length_bound:
                relax = [(bl, v)]
                on_path = set(path)
                while relax:
                    bl, u = relax.pop()
                    if lock.get(u, length_bound) < length_bound - bl + 1:
                        lock[u] = length_bound - bl + 1
                        relax.extend((bl + 1, w) for w in blocked_by.get(u, ()) if w not in on_path)
            else:
                for w in graph.get(v, ()):
                    if w in allowed:
                        blocked_by.setdefault(w, {})[v] = None


def bounded_cycles(graph: Graph, vertices: Sequence[Hashable], length_bound: int,
                   skip: Callable[[list[Hashable]], bool] | None = None) -> Iterator[list[Hashable]]:
    """Every elementary cycle of at most ``length_bound`` vertices among ``vertices``, in a fixed order.

    Each cycle starts at its earliest vertex in ``vertices`` order; cycles for which ``skip(cycle)``
    is true are not yielded (they still count as found for nothing else). The order is: components
    by their first vertex; within one, the cycles through its first vertex (depth first, successors
    in the graph's order), then those of the rest.
    """
    position = {v: i for i, v in enumerate(vertices)}
    todo = [c for c in strong_components(graph, vertices) if len(c) > 1]
    while todo:
        comp = todo.pop(0)
        allowed = set(comp)
        start = comp[0]
        for cycle in _cycles_through(graph, allowed, start, length_bound):
            if skip is None or not skip(cycle):
                yield cycle
        rest = comp[1:]
        more = [c for c in strong_components(graph, rest) if len(c) > 1]
        todo = sorted(more + todo, key=lambda c: position[c[0]])
