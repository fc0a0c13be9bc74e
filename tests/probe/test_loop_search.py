"""Property: the probe's own loop search agrees with networkx path searches on the same flattened circuit."""

from __future__ import annotations

import networkx as nx
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from netloop.netlist import parse_text
from netloop.probe.loops import connectivity, loop_report
from netloop.probe.scope import flat_terminals
from netloop.probe.sides import ac_ground_nodes

_ACTIVE = frozenset("MQJZEGFHBX")
NODES = ("n0", "n1", "n2", "n3", "n4", "0", "vdd")
SUBCIRCUIT = [".subckt amp i o", "E1 o 0 i 0 10", "R1 o i 1k", ".ends"]


def reference(text: str, side_a: str, side_b: str) -> tuple[bool, tuple[str, ...], tuple[str, ...]]:
    """loop_report's definition, computed with networkx (2.x/3.x has_path, restricted_view, node_connected_component)."""
    netlist = parse_text(text)
    globals_ = frozenset(netlist.globals)
    ground = ac_ground_nodes(netlist, globals_)
    g = nx.Graph()
    for t in flat_terminals(netlist, globals_):
        if t.node not in ground:
            g.add_edge(("e", t.scope.label(t.element), t.element.kind), ("n", t.node))
    a, b = ("n", side_a), ("n", side_b)
    if a not in g or b not in g:
        return False, (), ()
    loads = sorted(v for v in g.neighbors(b) if g.degree(v) > 1 or v in g.neighbors(a))
    branches: dict[frozenset, list] = {}
    for v in loads:
        branches.setdefault(frozenset(g.neighbors(v)) - {b}, []).append(v)
    loops, others = [], []
    for members in branches.values():
        alone = nx.restricted_view(g, (b, *(u for u in loads if u not in members)), ())
        if any(nx.has_path(alone, v, a) for v in members):
            loops.append("||".join(v[1] for v in members))
            continue
        comp = nx.node_connected_component(nx.restricted_view(g, (b,), ()), members[0])
        if a not in comp and any(x[0] == "e" and x[2] in _ACTIVE for x in comp):
            others.append("||".join(v[1] for v in members))
    return nx.has_path(g, a, b), tuple(loops), tuple(others)


card = st.tuples(st.sampled_from("RRCEGMVX"), st.lists(st.sampled_from(NODES), min_size=4, max_size=4))


def deck(cards: list[tuple[str, list[str]]]) -> str:
    """A random netlist (element values invented) of two-terminal parts, controlled sources, MOSFETs, supplies and instances."""
    lines = ["random connections", *SUBCIRCUIT, ".model nch nmos level=1"]
    for k, (kind, (p, q, r, s)) in enumerate(cards):
        lines.append({
            "R": f"R{k} {p} {q} 1k", "C": f"C{k} {p} {q} 1p", "E": f"E{k} {p} {q} {r} {s} 10",
            "G": f"G{k} {p} {q} {r} {s} 1m", "M": f"M{k} {p} {q} {r} 0 nch", "V": f"V{k} {p} {q} dc 1", "X": f"X{k} {p} {q} amp",
        }[kind])
    return "\n".join(lines) + "\n.end\n"


@settings(max_examples=300, deadline=None, derandomize=True)
@given(cards=st.lists(card, min_size=2, max_size=10), a=st.sampled_from(NODES[:5] + ("x0.o", "x1.i")), b=st.sampled_from(NODES[:5]))
def test_loop_report_matches_networkx(cards, a, b):
    """On random circuits and two different nodes, on_loop, the loops and the other circuits equal networkx's path searches."""
    assume(a != b)  # a break's two sides are always two nodes
    text = deck(cards)
    netlist = parse_text(text)
    globals_ = frozenset(netlist.globals)
    graph = connectivity(netlist, globals_, ac_ground_nodes(netlist, globals_), frozenset())
    assert loop_report(graph, a, b) == reference(text, a, b)


def test_one_vertex_per_name_and_letter_even_when_a_label_has_two_letters():
    """A label seen with two letters is two vertices, and the second letter's cards of one name stay one vertex, as the
    first letter's do: ngspice names a subcircuit's capacitor c5 in x1 c.x1.c5, not the instance x1.c5, and cards of one
    name are one name to it (from memory: the ngspice manual's subcircuit expansion)."""
    text = ("one label, two letters (invented)\n.subckt cell a b\nC5 a b 1p\nC5 b c 1p\n.ends\n"
            "X1.c5 n3 n4 0 0 sky130_fd_pr__nfet_01v8 w=1 l=1\nX1 n1 n2 cell\n.end\n")
    netlist = parse_text(text)
    globals_ = frozenset(netlist.globals)
    graph = connectivity(netlist, globals_, ac_ground_nodes(netlist, globals_), frozenset())
    vertices = sorted((graph.kinds[k], sorted(graph.nodes[k])) for k, label in enumerate(graph.labels) if label == "x1.c5")
    assert vertices == [("C", ["n1", "n2", "x1.c"]), ("X", ["n3", "n4"])]
