"""Signal-flow rules: which node each element passes signal to, checked on one-element netlists."""

from __future__ import annotations

import pytest

from netloop.graph import find_loops, flatten
from netloop.graph.signal_flow import signal_flow_graph, signal_nodes
from netloop.netlist import parse_text


def _edges(text: str) -> set[tuple[str, str, str]]:
    g = signal_flow_graph(flatten(parse_text("t\n" + text + "\n.end\n")))
    return {(a, b, d["element"]) for a, b, d in g.edges(data=True)}


def test_mosfet_gate_drives_drain_and_source_and_source_drives_drain():
    """A MOSFET passes gate -> drain (common source), gate -> source (follower), source -> drain (common gate), never drain -> source."""
    # Reference: the MOSFET small-signal model i_d = gm v_gs + gmb v_bs + gds v_ds (Razavi, Design of Analog
    # CMOS Integrated Circuits, 2001, ch. 3: common-source, source-follower and common-gate stages; from memory).
    edges = _edges("Vdd vdd 0 1\nM1 d g s 0 nch\nRd d vdd 1k\nRs s 0 1k\nRg g 0 1k")
    assert {(a, b) for a, b, _ in edges} == {("g", "d"), ("g", "s"), ("s", "d")}


def test_bjt_base_drives_collector_and_emitter():
    """A BJT passes base -> collector, base -> emitter and emitter -> collector; the substrate pin carries nothing."""
    # Reference: the hybrid-pi model i_c = gm v_be (Sedra and Smith, Microelectronic Circuits, ch. 6; from memory).
    edges = _edges(".model npn1 npn\nQ1 c b e sub npn1\nRc c 0 1k\nRe e 0 1k\nRb b 0 1k\nRs sub 0 1")
    assert {(a, b) for a, b, _ in edges} == {("b", "c"), ("b", "e"), ("e", "c")}


def test_controlled_sources_go_from_controls_to_outputs_and_passives_both_ways():
    """E and G pass their controlling nodes to their outputs only; R passes both ways; ground and supplies carry nothing."""
    # Reference: the ngspice manual's definition of E/G (output set by the controlling voltage) and the rules in signal_flow.py.
    edges = _edges("Vs sup 0 1\nE1 o1 0 a b 2\nG1 o2 0 o1 0 1m\nR1 o2 a 1k\nR2 a sup 1k\nR3 b 0 1k")
    assert edges == {
        ("a", "o1", "e1"), ("b", "o1", "e1"), ("o1", "o2", "g1"), ("o2", "a", "r1"), ("a", "o2", "r1"),
    }


def test_current_controlled_and_behavioural_sources_read_their_controls():
    """F/H read the nodes of their controlling V source; a B source reads every node its expression names."""
    # Reference: ngspice manual, F/H controlled by the current of a named voltage source; B sources by v() in the expression.
    edges = _edges("Vsense x y 0\nR1 x 0 1k\nR2 y 0 1k\nH1 h 0 vsense 1k\nB1 b 0 v=v(h)*2+v(q,y)\nR3 h 0 1\nR4 b 0 1\nR5 q 0 1")
    active = {(a, b) for a, b, el in edges if el in ("h1", "b1")}
    assert active == {("x", "h"), ("y", "h"), ("h", "b"), ("q", "b"), ("y", "b")}


def test_supplies_and_globals_are_not_signal_nodes():
    """Ground, .global nets and nets held by a chain of V sources from ground are not signal nodes; a V between signal nodes is a short."""
    # Reference: an ideal voltage source is an AC short (ngspice manual, independent sources; common practice).
    flat = flatten(parse_text("t\n.global vg\nV1 a 0 1\nV2 b a 1\nV3 c d 0\nR1 c vg 1k\nR2 d 0 1k\nR3 b c 1k\n.end\n"))
    assert signal_nodes(flat) == frozenset({"c", "d"})
    edges = {(a, b, d["element"]) for a, b, d in signal_flow_graph(flat).edges(data=True)}
    assert edges == {("c", "d", "v3"), ("d", "c", "v3")}


def test_diode_connected_transistor_is_two_terminal():
    """A diode-connected MOSFET (gate on drain) is a passive two-way element between drain and source, with no self edge."""
    # Reference: with v_gs = v_ds the drain current depends on one voltage only, a two-terminal
    # nonlinear resistor of about 1/gm (Razavi, Design of Analog CMOS Integrated Circuits, 2001, ch. 3; from memory).
    g = signal_flow_graph(flatten(parse_text("t\nVdd vdd 0 1\nI1 vdd d 1u\nM1 d d s 0 nch\nRs s 0 1k\n.end\n")))
    assert {(a, b, d["element"], d["passive"]) for a, b, d in g.edges(data=True)} == {("d", "s", "m1", True), ("s", "d", "m1", True)}


def test_behavioural_source_inside_an_instance_reads_the_parent_net_of_a_pin():
    """A B source in a subcircuit that reads v(pin) is controlled by the parent's net on that pin, and by internal nodes by hierarchical name."""
    # Reference: ngspice manual, subcircuit expansion: a pin is the parent's node, an internal node is local to the instance.
    text = "t\n.subckt blk in out\nR0 in mid 1k\nB1 out 0 v=v(in)+v(mid)\nR1 out 0 1k\n.ends\nX1 a y blk\nRa a 0 1k\n.end\n"
    edges = {(a, b) for a, b, d in signal_flow_graph(flatten(parse_text(text))).edges(data=True) if d["element"] == "x1.b1"}
    assert edges == {("a", "y"), ("x1.mid", "y")}


def test_behavioural_source_reads_a_pin_and_an_inner_net_no_primitive_of_its_instance_touches():
    """v(pin) and v(net) in an instance are the parent's net on the pin and the instance's own net even when only the expression (or a deeper instance) touches them."""
    # Reference: ngspice 39's own expansion (`listing e` of this deck's X1 alone prints "b.x1.b1 b 0 v= -1.0e+01 * v(a)":
    # the pin in is the parent's net a); an inner net is the instance's own net, whatever level touches it.
    text = ("t\n.subckt buf i o\nE1 o 0 i 0 1\n.ends\n"
            ".subckt amp in out\nB1 out 0 v={-10*v(in)+v(mid)}\nXb out mid buf\nRm mid 0 1k\n.ends\n"
            "X1 a b amp\nR1 b a 10k\nRg a 0 1k\n.end\n")
    flat = flatten(parse_text(text))
    edges = {(a, b) for a, b, d in signal_flow_graph(flat).edges(data=True) if d["element"] == "x1.b1"}
    assert edges == {("a", "b"), ("x1.mid", "b")}
    (group,) = find_loops(flat).groups  # a -> b (x1.b1) -> a (r1), and b -> x1.mid (the buffer) -> b (x1.b1)
    assert {frozenset(lp.elements) for lp in group.loops} == {frozenset({"x1.b1", "r1"}), frozenset({"x1.b1", "x1.xb.e1"})}


def test_behavioural_source_reading_a_current_is_controlled_by_that_source_s_nodes():
    """A B source whose expression reads i(vsense) is controlled by both nodes of vsense, as an H source naming vsense is."""
    # Reference: ngspice manual, B source: i(vname) is the current through the voltage source vname, set by the voltage across
    # the branch it senses (the same rule as F/H in signal_flow.py).
    edges = _edges("Vsense x y 0\nR1 x 0 1k\nR2 y 0 1k\nB1 o 0 i={-2*i(vsense)}\nR3 o x 1k")
    assert {(a, b) for a, b, el in edges if el == "b1"} == {("x", "o"), ("y", "o")}


@pytest.mark.parametrize("card", [
    "T1 a 0 b 0 z0=50 td=1n",  # lossless transmission line
    "U1 a b 0 rcline l=1m\n.model rcline urc",  # uniform distributed RC line
    "X1 a b 0 nowhere",  # an instance whose subcircuit is not in the netlist
    "A1 a b amod\n.model amod gain",  # an XSPICE code model
])
def test_lines_code_models_and_unexpanded_instances_pass_signal_between_every_pair_of_pins(card):
    """A transmission line, an RC line, an XSPICE model and an unexpanded instance pass signal both ways between every pair of their signal pins."""
    # Reference: a transmission line or RC line is a reciprocal passive two-port (Pozar, Microwave Engineering, 4th ed.,
    # ch. 4, reciprocal networks; from memory); what an A model or an unexpanded X does inside is unknown, so every
    # pair is kept (the rule in signal_flow.py's docstring).
    name = card.split()[0].lower()
    edges = _edges(card + "\nRa a 0 1k\nRb b 0 1k")
    assert {(a, b) for a, b, el in edges if el == name} == {("a", "b"), ("b", "a")}
