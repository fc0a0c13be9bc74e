"""Is the split node on a loop, and does its load side feed more than one loop or other circuits?"""

from __future__ import annotations

from collections.abc import Collection, Iterable
from dataclasses import dataclass

from netloop.netlist.cards import controlling_sources, expression_references
from netloop.netlist.model import Netlist
from netloop.probe.scope import flattener, primitive_elements

__all__ = ["Connectivity", "connectivity", "loop_report"]

_ACTIVE = frozenset("MQJZEGFHBX")


@dataclass(frozen=True, slots=True)
class Connectivity:
    """The element-node graph of a flattened circuit, as plain lists (cheap to build for a million terminals).

    Element ``k`` is ``labels[k]`` (``xamp.m1`` style) of letter ``kinds[k]``, touching the flat nodes
    ``nodes[k]`` (each once); ``at_node[n]`` lists the elements on node ``n``, each once. Elements of the
    same label and letter are one vertex, as they are one name to ngspice.
    """

    labels: list[str]
    kinds: list[str]
    nodes: list[list[str]]
    at_node: dict[str, list[int]]


def connectivity(netlist: Netlist, globals_: frozenset[str], ac_ground: frozenset[str], skip: frozenset[str]) -> Connectivity:
    """Element-node graph of the flattened circuit without AC-ground nodes and without the ``skip`` elements.

    An element left with no node (all of them AC ground) is not in the graph. A K card (coupled inductors) touches the
    nodes of the inductors it names: signal passes between their windings (ngspice manual, coupled inductors), as the
    signal-flow graph's edges across it say (netloop.graph.signal_flow). So do the elements controlled from elsewhere:
    an E, G or B whose value is an expression touches the nodes its ``v(...)`` names and those of the sources its
    ``i(...)`` names, and an F, H or W those of its controlling sources (a source named from inside an instance is looked up
    outward, as ngspice does).
    """
    g = Connectivity([], [], [], {})
    couplings: list[tuple[str, str, tuple[str, ...]]] = []  # (K label, its scope's prefix, the inductors' names)
    sensed: list[tuple[str, tuple[str, ...], tuple[str, ...]]] = []  # (label, its scope's path, the sources whose current it reads)
    ids: dict[str, int] = {}  # label -> element id (of the first letter seen with that label)
    more_ids: dict[tuple[str, str], int] = {}  # (label, letter) for a label seen with another letter too
    at_node = g.at_node
    scope = flat = None
    prefix, same = "", True
    for s, e in primitive_elements(netlist, globals_):
        if s is not scope:
            scope, flat = s, flattener(s, globals_)
            prefix = ".".join(s.path) + "." if s.path else ""
            same = not s.path and not s.nets  # flat keeps every name (the top level)
        name = e.name
        label = prefix + name.lower()  # Scope.label
        if label in skip:
            continue
        if name[0] in "kK":  # its tokens name inductors, not nodes: joined once every inductor is in the graph
            couplings.append((label, prefix, tuple(t.lower() for t in e.tokens[:2])))
            continue
        named, sources = expression_references(e)
        sources += controlling_sources(e)
        if sources:
            sensed.append((label, s.path, sources))
        mine = None
        for node in (*e.nodes, *named) if same else map(flat, (*e.nodes, *named)):
            if node in ac_ground:
                continue
            if mine is None:
                kind = name[0].upper()
                k = ids.get(label)
                if k is None:
                    k = ids[label] = len(g.labels)
                elif g.kinds[k] != kind:  # the same label with another letter: another vertex
                    k = more_ids.get((label, kind))
                    if k is None:
                        k = more_ids[(label, kind)] = len(g.labels)
                if k == len(g.labels):  # a new vertex
                    g.labels.append(label)
                    g.kinds.append(kind)
                    g.nodes.append([])
                mine = g.nodes[k]
            if node in mine:  # a second terminal on the same node, or a name given twice: one edge
                continue
            mine.append(node)
            here = at_node.get(node)
            if here is None:
                at_node[node] = [k]
            else:
                here.append(k)
    for label, path, sources in sensed:
        k = ids.get(label)
        for source in sources if k is not None else ():
            found = next((i for depth in range(len(path), -1, -1) if (i := ids.get(".".join((*path[:depth], source)))) is not None), None)
            for node in g.nodes[found] if found is not None else ():
                _join(g, k, node)
    for label, prefix, inductors in couplings:
        nodes = [n for name in inductors if (i := ids.get(prefix + name)) is not None and g.kinds[i] == "L" for n in g.nodes[i]]
        if nodes:
            k = len(g.labels)
            g.labels.append(label)
            g.kinds.append("K")
            g.nodes.append([])
            for node in nodes:
                _join(g, k, node)
    return g


def _join(g: Connectivity, k: int, node: str) -> None:
    """Element ``k`` touches ``node`` too (once)."""
    if node not in g.nodes[k]:
        g.nodes[k].append(node)
        g.at_node.setdefault(node, []).append(k)


def _search(g: Connectivity, starts: Iterable[int], removed_node: str, removed: Collection[int], goal: str | None) -> tuple[bool, set[int], set[str]]:
    """Breadth-first search from the elements ``starts`` without node ``removed_node`` and elements ``removed``.

    Returns whether node ``goal`` was reached (the search stops there) and the elements and nodes seen:
    with no goal, or when it is not reached, the whole connected component of the starts.
    """
    elements = {k for k in starts if k not in removed}
    seen_nodes = {removed_node}
    todo = list(elements)
    while todo:
        found = []
        for k in todo:
            for n in g.nodes[k]:
                if n not in seen_nodes:
                    if n == goal:
                        return True, elements, seen_nodes
                    seen_nodes.add(n)
                    for j in g.at_node[n]:
                        if j not in elements and j not in removed:
                            elements.add(j)
                            found.append(j)
        todo = found
    seen_nodes.discard(removed_node)
    return False, elements, seen_nodes


def loop_report(g: Connectivity, side_a: str, side_b: str) -> tuple[bool, tuple[str, ...], tuple[str, ...]]:
    """Whether b reaches back to a, and which load-side elements close loops or feed other circuits.

    Returns ``(on_loop, loops, others)``: ``loops`` lists the load-side elements each of which leads
    back to the driver side without passing through the other load-side elements (one loop each);
    ``others`` lists load-side elements that never return to the driver but lead to active devices
    (another circuit fed by the node, such as a second amplifier on a shared bias node).
    """
    a, b = side_a, side_b
    if a not in g.at_node or b not in g.at_node:
        return False, (), ()
    on_a = set(g.at_node[a])
    loads = sorted((k for k in g.at_node[b] if len(g.nodes[k]) > 1 or k in on_a), key=lambda k: (g.labels[k], g.kinds[k]))
    # elements in parallel (same far nodes, such as Rf || Cf) are one branch
    branches: dict[frozenset, list[int]] = {}
    for k in loads:
        branches.setdefault(frozenset(g.nodes[k]) - {b}, []).append(k)
    loops, others = [], []
    for members in branches.values():
        name = "||".join(g.labels[k] for k in members)
        closes, _, _ = _search(g, members, b, set(loads) - set(members), a)
        if closes:
            loops.append(name)
            continue
        returns, elements, _ = _search(g, members[:1], b, (), a)  # its component without b, unless a is in it
        if not returns and any(g.kinds[k] in _ACTIVE for k in elements):
            others.append(name)
    # A path from b to a leaves b through a load; from the last load on it, the rest of the path avoids
    # b and every other load, so that load's branch closes a loop: b reaches a exactly when some branch
    # does (no separate search over the whole graph).
    return bool(loops), tuple(loops), tuple(others)
