"""Loops at a designer's level: 0 V sources join nodes, mirror inputs and pair tails are looked through, no loop is lost."""

from __future__ import annotations

import networkx as nx

from netloop.graph import flatten
from netloop.graph.cycles import bounded_cycles, strong_components
from netloop.graph.loops import find_loops
from netloop.netlist import parse_text

MODELS = ".model nch nmos (level=1 vto=0.5 kp=100u)\n.model pch pmos (level=1 vto=-0.5 kp=40u)\n"


def _groups(text: str):
    return find_loops(flatten(parse_text(text))).groups


# Two stages in a ring, the second a five-transistor pair whose mirror input is d1 and whose tail is t:
# x -> (M1 gate, M2 drain) ... By construction the signal reaches y from x by two routes inside the pair
# (x -M1-> d1 -M4-> y through the mirror, x -M1-> t -M2-> y through the tail), and y returns to x through
# the transconductor G1: one loop for a designer, four elementary cycles of the transistor-level graph.
PAIR_RING = """pair in a ring (invented)
Vdd vdd 0 3
Vr r 0 1.5
M1 d1 x t 0 nch w=10u l=1u
M2 y r t 0 nch w=10u l=1u
M3 d1 d1 vdd vdd pch w=10u l=1u
M4 y d1 vdd vdd pch w=10u l=1u
I5 t 0 20u
G1 0 x y 0 1m
Rx x 0 10k
Ry y 0 100k
""" + MODELS + ".end\n"


def test_a_pair_with_its_mirror_is_one_step_of_one_loop():
    """The routes through the mirror input d1 and through the tail t become one step x -> y: one loop, d1 and t looked through."""
    # Reference: by construction (PAIR_RING): the only loop a designer names is x -> pair -> y -> G1 -> x.
    (group,) = _groups(PAIR_RING)
    (loop,) = group.loops
    assert loop.nodes == ("x", "y")
    (step,) = [s for s in loop.steps if s.source == "x"]
    assert set(step.elements) == {"m1", "m2", "m4"} and set(step.through) == {"d1", "t"}
    assert set(group.looked_through) == {"d1", "t"}
    assert {c.node for c in group.candidates} == {"x", "y"}
    assert {t[:2] for t in step.enters} == {("m2", "d"), ("m4", "d")}  # the terminals by which the step reaches y


def test_without_looking_through_the_same_netlist_has_several_elementary_cycles():
    """The transistor-level signal-flow graph of PAIR_RING has more elementary cycles than the one loop listed (what the collapse removes)."""
    # Reference: networkx simple_cycles on netloop's own signal-flow multigraph (one edge per element and pin pair).
    from netloop.graph import signal_flow_graph

    g = nx.DiGraph(signal_flow_graph(flatten(parse_text(PAIR_RING))))
    assert len(list(nx.simple_cycles(g))) >= 3


def test_a_zero_volt_source_joins_two_nodes_and_a_diode_through_it_stays_a_diode():
    """A 0 V current-sense source between a mirror's diode drain and its gate joins the nodes; the device is still a diode, so no
    two-node loop appears through it, and the loop through the mirror is listed once with both nodes named as joined."""
    # Reference: by construction: M3's gate g3 reaches its drain d3 only through Vsense (an AC short), so M3 is
    # diode-connected and d3/g3 is the mirror's input; the ring x -> (M1) -> d3=g3 -> (M4) -> y -> G1 -> x is the only loop.
    text = PAIR_RING.replace("M3 d1 d1 vdd vdd", "M3 d3 g3 vdd vdd").replace("M1 d1 x t 0", "M1 d3 x t 0").replace(
        "M4 y d1 vdd vdd", "M4 y g3 vdd vdd").replace("Rx x 0 10k\n", "Rx x 0 10k\nVsense d3 g3 0\n")
    (group,) = _groups(text)
    assert len(group.loops) == 1
    assert group.merged == (("d3", "g3"),) or group.merged == (("g3", "d3"),)
    assert {"d3", "g3"} <= set(group.nodes) and "d3" not in {c.node for c in group.candidates}


def test_a_sense_source_in_series_on_the_loop_makes_both_its_nodes_break_candidates():
    """A 0 V source in series between a stage's output and the next stage's input: one loop; both of its nodes are candidates,
    and the stage fed from the far side of the source counts it as its driver's input."""
    # Reference: by construction: y -Vs-> y2 is a short for AC, so the ring x -> y=y2 -> x has one loop, and a break
    # on either side of the source cuts it; G2 (controlled by y2) is the only element driving x, G1 the only one driving y.
    text = """series sense (invented)
G1 0 y x 0 1m
Vs y y2 0
G2 0 x y2 0 1m
Rx x 0 1k
Ry y 0 1k
.end
"""
    (group,) = _groups(text)
    (loop,) = group.loops
    assert set(loop.opened_by) == {"x", "y", "y2"}
    assert group.merged == (("y", "y2"),)
    # G2 drives x from y2, a node of the group through the source: x has one driver, y passes the signal on through Vs
    assert [(c.node, c.drivers, c.loads) for c in group.candidates] == [
        ("x", ("g2",), ("g1.cp",)), ("y2", ("vs",), ("g2.cp",)), ("y", ("g1",), ("vs.p",))]


def test_a_follower_output_that_drives_a_gate_is_kept_and_is_the_best_break():
    """A source follower's output node feeding a gate is not looked through (only sources touch a pair's tail): it is a loop
    node, and the best break, driven by a low-impedance output and loading only a gate."""
    # Reference: the collapse rule (netloop/graph/collapse.py docstring: a node only sources or emitters touch is looked
    # through, here a gate touches v too); a break where a low-impedance output drives a high-impedance input is where
    # the probe's answer needs the least correction (Middlebrook, "Measurement of loop gain in feedback systems", 1975;
    # common practice). By construction: a -M3-> d -M1 (follower)-> v -M2-> a is the ring's only loop.
    text = """follower in a ring (invented)
Vdd vdd 0 3
M3 d a 0 0 nch w=10u l=1u
Rd d vdd 10k
M1 vdd d v 0 nch w=10u l=1u
I1 v 0 20u
M2 a v 0 0 nch w=10u l=1u
Ra a vdd 10k
""" + MODELS + ".end\n"
    (group,) = _groups(text)
    (loop,) = group.loops
    assert loop.describe() == "d -m1(g>s)-> v -m2(g>d)-> a -m3(g>d)-> d" and group.looked_through == ()
    best = group.best
    assert (best.node, best.drivers, best.loads, best.low_impedance_driver, best.high_impedance_load) == ("v", ("m1",), ("m2.g",), True, True)


def test_a_loop_made_only_of_mirror_inputs_is_kept():
    """A beta-multiplier bias cell, whose loop runs through two diode-connected mirror inputs only, keeps its loop."""
    # Reference: by construction: ng (diode M1) -> M2 -> pg (diode M4) -> M3 -> ng is the cell's self-biasing loop;
    # looking through either node would close it on the other.
    text = """beta multiplier (invented)
Vdd vdd 0 3
M1 ng ng 0 0 nch w=5u l=2u
M2 pg ng s2 0 nch w=20u l=2u
Rs s2 0 10k
M3 ng pg vdd vdd pch w=20u l=2u
M4 pg pg vdd vdd pch w=20u l=2u
""" + MODELS + ".end\n"
    (group,) = _groups(text)
    assert group.loops and {"ng", "pg"} <= {n for lp in group.loops for n in lp.nodes}


def test_components_and_cycles_follow_the_given_order():
    """strong_components and bounded_cycles list the same components and cycles as networkx, in the given vertex order."""
    # Reference: networkx 3 strongly_connected_components and simple_cycles on the same graph (as sets);
    # the order is by construction: components by first vertex, each cycle starting at its earliest vertex.
    edges = [("a", "b"), ("b", "a"), ("b", "c"), ("c", "b"), ("c", "a"), ("d", "e"), ("e", "d"), ("a", "d")]
    vertices = ["a", "b", "c", "d", "e"]
    graph = {v: [b for a, b in edges if a == v] for v in vertices}
    comps = strong_components(graph, vertices)
    assert comps == [["a", "b", "c"], ["d", "e"]]
    assert {frozenset(c) for c in comps} == {frozenset(c) for c in nx.strongly_connected_components(nx.DiGraph(edges))}
    cycles = list(bounded_cycles(graph, vertices, 8))
    assert sorted(map(sorted, cycles)) == sorted(map(sorted, nx.simple_cycles(nx.DiGraph(edges))))
    assert all(c[0] == min(c, key=vertices.index) for c in cycles)
    assert list(bounded_cycles(graph, vertices, 8)) == cycles


def test_a_two_terminal_element_loads_a_node_by_whichever_terminal_it_has_there():
    """A Miller capacitor between x and y loads y by its second terminal (cc.n) and x by its first (cc.p): each candidate
    names the terminal on its own node."""
    # Reference: by construction (cc x y: pin p on x, pin n on y; g2 drives y from x, ef closes the loop back to x's input).
    text = ("Miller stage (invented)\ng1 0 x a 0 1m\nr1 x 0 10k\nc1 x 0 1p\ng2 y 0 x 0 1m\nr2 y 0 10k\nc2 y 0 5p\ncc x y 1p\n"
            "ef a 0 y 0 -0.1\n.end\n")
    (group,) = _groups(text)
    assert {c.node: (c.drivers, c.loads) for c in group.candidates} == {
        "a": (("ef",), ("g1.cp",)), "x": (("g1",), ("g2.cp", "cc.p")), "y": (("g2",), ("cc.n", "ef.cp"))}


def test_a_vertex_kept_does_not_stop_the_next_from_being_looked_through():
    """look_through keeps a vertex whose predecessors and successors share one (looking through k would close a -> k -> a
    on itself) and goes on to the next: m, between a and b only, is looked through and a -> b takes its place."""
    # Reference: by construction, the rule of netloop.graph.collapse.look_through's docstring applied vertex by vertex.
    from netloop.graph.collapse import Passage, look_through

    pairs = [("a", "k"), ("k", "a"), ("a", "m"), ("m", "b"), ("b", "a")]
    edges = {(s, t): Passage.hop(f"e{s}{t}", "p", "n", s, t) for s, t in pairs}
    gone = look_through(edges, ["k", "m", "a", "b"], {"k": True, "m": True})
    assert gone == ["m"]
    assert sorted(edges) == [("a", "b"), ("a", "k"), ("b", "a"), ("k", "a")]
    assert list(edges[("a", "b")].elements) == ["eam", "emb"]


# A cascoded mirror as a designer draws it (invented): Mi's gate on a, its drain on b, the cascode Mc from b back to a,
# its gate on a bias; Mo mirrors a into the output y. A pair device Mp with a cascode Mq over it (source on the tail t,
# which is a signal node) is an amplifier, not a mirror input. The ring closes through G1 (y -> a) and G2 (y -> x).
CASCODED_MIRROR = """cascoded mirror (invented)
Vdd vdd 0 3
Vb vb 0 1.2
Vr r 0 1.5
Mi b a 0 0 nch w=10u l=1u
Mc a vb b 0 nch w=10u l=1u
Mo y a 0 0 nch w=10u l=1u
Mp c x t 0 nch w=10u l=1u
Mr c2 r t 0 nch w=10u l=1u
It t 0 20u
Mq y vb c 0 nch w=10u l=1u
Ry vdd y 100k
G1 0 a y 0 1m
G2 0 x y 0 1m
Rx x 0 10k
""" + MODELS


def test_a_cascoded_mirror_input_is_a_one_port_and_a_cascoded_pair_device_is_an_amplifier():
    """The mirror's input device Mi (drain back to its gate through the cascode Mc, source on ground) is diode-connected
    through its cascode: no loop a -> b -> a is counted, and the loops through a go on through Mo; the pair device Mp,
    whose source is the tail t, keeps its gate-to-drain step: the loop x -> c -> y -> x remains."""
    # Reference: circuit theory: Mi's drain current returns to its gate through Mc, so Mi with Mc is a two-terminal device
    # at a (the cascode version of a diode-connected transistor); Mp's current goes on through Mq to y, a gain.
    from netloop.graph.signal_flow import cascode_diodes, signal_nodes  # noqa: PLC0415

    circuit = flatten(parse_text(CASCODED_MIRROR))
    assert cascode_diodes(circuit, signal_nodes(circuit)) == frozenset({"mi"})
    loops = [frozenset(lp.nodes) for g in _groups(CASCODED_MIRROR) for lp in g.loops]
    assert frozenset({"a", "b"}) not in loops
    assert any({"x", "y"} <= lp for lp in loops) and any({"a", "y"} <= lp for lp in loops)
    assert all("mi" not in step.elements for g in _groups(CASCODED_MIRROR) for lp in g.loops for step in lp.steps)
