"""Breaks two levels down: every definition on the instance path is copied, nothing else changes, and the OP stays."""

from __future__ import annotations

import pytest

from netloop.errors import ProbeError
from netloop.netlist import parse_file, parse_text, write_netlist
from netloop.probe import break_loop

from .test_operating_point import assert_same_op
from .test_sides import HIER

# Invented: a channel subcircuit holding two stages (stage defined inside channel), used twice.
NESTED = """nested hierarchy: two channels of two stages each
.model nch nmos level=1 vto=0.5 kp=20u lambda=0.05
.subckt channel in out vdd
.subckt stage in out vdd
Rin in g 10k
M1 n5 g 0 0 nch w=10u l=1u
Rd vdd n5 20k
M2 vdd n5 out 0 nch w=10u l=1u
Rs out 0 20k
Rf out g 100k
.ends stage
xa in mid vdd stage
xb mid out vdd stage
.ends channel
Vdd vdd 0 dc 3.3
Vin in 0 dc 1 ac 1
xc1 in o1 vdd channel
xc2 in o2 vdd channel
"""


def test_nested_copies_only_the_path():
    """Breaking xc2.xa.n5 copies channel (for xc2) and stage (for xc2.xa); xc1, xc2.xb and the originals stay."""
    nl = parse_text(NESTED)
    p = break_loop(nl, "xc2.xa.n5")
    assert p.side_b == "xc2.xa.n5" and p.side_a == "xc2.xa.n5_drive"
    assert p.series_source == "v.xc2.xa.vnl_series"
    assert p.driver_terminals == ("xc2.xa.m1.d",)
    assert p.copied_subcircuits == (("channel", "channel_broken_in_xc2"), ("stage", "stage_broken_in_xc2_xa"))
    new = write_netlist(p.netlist)
    assert "xc1 in o1 vdd channel\n" in new and "xc2 in o2 vdd channel_broken_in_xc2\n" in new
    copy = new[new.index(".subckt channel_broken_in_xc2"):new.index(".ends channel_broken_in_xc2")]
    assert "xa in mid vdd stage_broken_in_xc2_xa" in copy and "xb mid out vdd stage\n" in copy
    assert ".subckt stage_broken_in_xc2_xa" in copy  # nested next to its original, visible where it is used
    original = write_netlist(nl)
    block = original[original.index(".subckt channel in"):original.index(".ends channel") + len(".ends channel")]
    assert block in new  # the original definition is written unchanged


@pytest.mark.ngspice
def test_nested_op_unchanged(simulator):
    """ngspice's op of every node, xc1 and xc2 alike, is unchanged by a break two levels down."""
    nl = parse_text(NESTED)
    before = simulator.operating_point(write_netlist(nl))
    assert "xc2.xa.n5" in before  # ngspice 39 names nested nodes instance.instance.node
    p = break_loop(nl, "xc2.xa.n5")
    after = simulator.operating_point(write_netlist(p.netlist))
    assert_same_op(before, after)
    assert p.side_a in after


def test_sky130_device_wrappers_are_transistors(circuits):
    """sky130 nfet/pfet wrapper instances count as transistors: XM6/XM7 drains drive out and XM1's gate loads it."""
    p = break_loop(parse_file(circuits / "sky130" / "miller_buffer.cir"), "out")
    assert set(p.driver_terminals) == {"xm6.d", "xm7.d", "cc.n"}  # the circuit's comment: driven by XM6 drain
    assert p.load_terminals == ("xm1.g",)


def test_missing_wrapper_definition_by_name():
    """An instance of a '...fet...' subcircuit whose definition is not loaded is read as d, g, s, b."""
    text = "no models\nVdd vdd 0 dc 1.8\nXM1 out g 0 0 my_nfet_wrap w=1\nRl vdd out 10k\nRf out g 100k\nCg g 0 1p\n"
    p = break_loop(parse_text(text), "out")
    assert p.driver_terminals == ("xm1.d",) and p.load_terminals == ("rf.p",)


# HIER (test_sides) with instance xa expanded by hand: its inner nodes renamed xa_g, xa_n5.
HIER_FLAT_BY_HAND = HIER.replace(
    "xa in mid vdd stage\n",
    "Rin_a in xa_g 10k\nM1_a xa_n5 xa_g 0 0 nch w=10u l=1u\nRd_a vdd xa_n5 20k\nCd_a xa_n5 0 50f\n"
    "M2_a vdd xa_n5 mid 0 nch w=10u l=1u\nRs_a mid 0 20k\nRf_a mid xa_g 100k\n",
)


@pytest.mark.ngspice
def test_break_inside_instance_equals_flat_break(simulator):
    """T measured at xa.n5 (probe inside a copied subcircuit, hierarchical source names for alter and save) equals T at the same node of a hand-flattened netlist."""
    from netloop.analysis.return_ratio import tian  # noqa: PLC0415

    from .conftest import probe_runs  # noqa: PLC0415

    hier = break_loop(parse_text(HIER), "xa.n5")
    flat = break_loop(parse_text(HIER_FLAT_BY_HAND), "xa_n5")
    assert flat.driver_terminals == ("m1_a.d",)
    _, qh, oph = probe_runs(simulator, hier, 1.0, 1e10, 5)
    _, qf, opf = probe_runs(simulator, flat, 1.0, 1e10, 5)
    th, tf = tian(qh.va1, qh.vb1, qh.ib2), tian(qf.va1, qf.vb1, qf.ib2)
    assert abs(th[0]) > 0.05  # a live loop (both transistors conducting)
    assert max(abs(th - tf) / abs(tf)) < 1e-9
    assert abs(oph["xa.n5"] - opf["xa_n5"]) < 1e-9


@pytest.mark.ngspice
def test_bundled_hierarchical_readout(simulator, circuits):
    """On circuits/hier/top.cir, breaking xa1.o1 keeps the includes, leaves Xa2 on the original subcircuit and every op node unchanged."""
    nl = parse_file(circuits / "hier" / "top.cir")
    p = break_loop(nl, "xa1.o1")
    text = write_netlist(p.netlist)
    assert ".include" in text and "miller_ota_broken_in_xa1" in text
    xa2 = next(line for line in write_netlist(nl).splitlines() if line.lower().startswith("xa2 "))
    assert xa2 in text.splitlines()
    assert_same_op(simulator.operating_point(write_netlist(nl)), simulator.operating_point(text))  # ngspice's own op


def test_forty_levels_of_nesting_are_walked_and_a_subcircuit_that_instantiates_itself_is_refused():
    """A chain of 40 subcircuits, each instantiating the next, is 41 scopes, all walked; one that instantiates itself is
    refused at the 64-level guard with a message that says so (common practice: a self-instantiating subcircuit has no
    flattened circuit; 64 levels is walk_scopes' documented bound, far beyond any real hierarchy)."""
    from netloop.probe.scope import walk_scopes

    cards = ["nested forty deep (invented)"]
    for level in range(40):
        cards += [f".subckt s{level} a b", f"X{level} a b s{level + 1}" if level < 39 else "R1 a b 1k", ".ends"]
    cards += ["X0 in 0 s0", "V1 in 0 dc 1"]
    scopes = list(walk_scopes(parse_text("\n".join(cards) + "\n"), frozenset({"0"})))
    assert len(scopes) == 41 and len(scopes[-1].path) == 40
    looped = parse_text("recursive (invented)\n.subckt loop a b\nXi a b loop\nR1 a b 1k\n.ends\nX1 o 0 loop\nV1 o 0 dc 1\n")
    with pytest.raises(ProbeError, match="deeper than 64 levels at x1(\\.xi){64}: is a subcircuit instantiating itself"):
        list(walk_scopes(looped, frozenset({"0"})))


TWO_LEVELS = """two levels (invented)
.subckt amp in out
E1 out 0 0 in 100
Ro out 0 1k
.ends
.subckt outer a b
Xs a b amp
Rl b 0 10k
.ends
Vin in 0 dc 0 ac 1
Xo x out outer
R1 out x 10k
R2 x in 10k
"""


def test_driver_naming_an_instance_inside_an_instance_breaks_inside_the_outer_one():
    """driver= naming an instance two levels down without a pin (xo.xs) takes that instance's terminal on the node as the
    driver side and breaks the net inside xo, where xs's output sits (breaking._scope_of_driver's docstring); the load
    side is the rest of the node: Rl at AC ground inside, the feedback resistor outside."""
    p = break_loop(parse_text(TWO_LEVELS), "out", driver="xo.xs")
    assert p.driver_terminals == ("xo.xs.out",)
    assert p.load_terminals == ("xo.b outside xo (r1.p)",)
    assert "driver side given by driver='xo.xs': xo.xs.out" in p.decided_by


def test_the_label_printed_for_an_inner_instance_terminal_is_taken_back_as_driver():
    """The driver terminal's label as netloop prints it (xo.xs.out: the pin out of xs inside xo) gives, as driver=, the
    same break as naming the instance (xo.xs); a pin the instance does not have is refused with the terminals there."""
    by_instance = break_loop(parse_text(TWO_LEVELS), "out", driver="xo.xs")
    by_label = break_loop(parse_text(TWO_LEVELS), "out", driver=by_instance.driver_terminals[0])
    assert (by_label.driver_terminals, by_label.load_terminals, by_label.shunt_terminals) == (
        by_instance.driver_terminals, by_instance.load_terminals, by_instance.shunt_terminals)
    assert write_netlist(by_label.netlist) == write_netlist(by_instance.netlist)
    with pytest.raises(ProbeError, match="driver 'xo.xs.in' has no terminal on node"):
        break_loop(parse_text(TWO_LEVELS), "out", driver="xo.xs.in")
