"""Is the split node on a loop, and does its load side feed more than one loop or other circuits?"""

from __future__ import annotations

import networkx as nx

from netloop.netlist.model import Netlist
from netloop.probe.scope import flat_terminals

__all__ = ["connectivity", "loop_report"]

_ACTIVE = frozenset("MQJZEGFHBX")


def connectivity(netlist: Netlist, globals_: frozenset[str], ac_ground: frozenset[str], skip: frozenset[str]) -> nx.Graph:
    """Element-node graph of the flattened circuit without AC-ground nodes and without the ``skip`` elements.

    Vertices are ``("n", flat node)`` and ``("e", label, kind)`` with label ``xamp.m1`` style.
    """
    g = nx.Graph()
    for t in flat_terminals(netlist, globals_):
        label = t.scope.label(t.element)
        if label in skip or t.node in ac_ground:
            continue
        g.add_edge(("e", label, t.element.kind), ("n", t.node))
    return g


def loop_report(g: nx.Graph, side_a: str, side_b: str) -> tuple[bool, tuple[str, ...], tuple[str, ...]]:
    """Whether b reaches back to a, and which load-side elements close loops or feed other circuits.

    Returns ``(on_loop, loops, others)``: ``loops`` lists the load-side elements each of which leads
    back to the driver side without passing through the other load-side elements (one loop each);
    ``others`` lists load-side elements that never return to the driver but lead to active devices
    (another circuit fed by the node, such as a second amplifier on a shared bias node).
    """
    a, b = ("n", side_a), ("n", side_b)
    if a not in g or b not in g:
        return False, (), ()
    on_loop = nx.has_path(g, a, b)
    loads = sorted(v for v in g.neighbors(b) if g.degree(v) > 1 or v in g.neighbors(a))
    without_b = nx.restricted_view(g, (b,), ())  # views, not copies: a large parasitic network stays cheap
    # elements in parallel (same far nodes, such as Rf || Cf) are one branch
    branches: dict[frozenset, list] = {}
    for v in loads:
        branches.setdefault(frozenset(g.neighbors(v)) - {b}, []).append(v)
    loops, others = [], []
    for members in branches.values():
        alone = nx.restricted_view(g, (b, *(u for u in loads if u not in members)), ())
        name = "||".join(v[1] for v in members)
        if any(nx.has_path(alone, v, a) for v in members):
            loops.append(name)
            continue
        comp = nx.node_connected_component(without_b, members[0])
        if a not in comp and any(x[0] == "e" and x[2] in _ACTIVE for x in comp):
            others.append(name)
    return on_loop, tuple(loops), tuple(others)
