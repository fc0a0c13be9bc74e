"""Signal-flow rules: which node each element passes signal to, checked on one-element netlists."""

from __future__ import annotations

from netloop.graph import flatten
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
