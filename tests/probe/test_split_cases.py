"""Split rules on the less common connections: block pins and device wrappers, 0 V sense sources, pseudo-resistors, fed taps."""

from __future__ import annotations

import numpy as np
import pytest

from netloop.analysis.return_ratio import tian
from netloop.errors import ProbeError
from netloop.netlist import parse_text
from netloop.probe import break_loop
from netloop.probe.breaking import locate_split

from .conftest import probe_runs
from .test_sides import HIER
from .test_split_rules import FOLLOWER_LDO, MODELS, SENSED_DIODE, TWO_STAGE

# An invented 5T OTA as a block (pins inp, inn, out, vdd); the models are the invented MODELS of test_split_rules.py.
OTA = (".subckt ota inp inn out vdd\nIb vdd nb 20u\nMb nb nb 0 0 nch w=10u l=1u\nM5 tail nb 0 0 nch w=20u l=1u\n"
       "M1 d1 inn tail 0 nch w=20u l=1u\nM2 out inp tail 0 nch w=20u l=1u\nM3 d1 d1 vdd vdd pch w=20u l=1u\n"
       "M4 out d1 vdd vdd pch w=20u l=1u\n.ends ota\n")


def _sides(text, at, **kw):
    p = break_loop(parse_text(text), at, **kw)
    return set(p.driver_terminals), set(p.load_terminals), set(p.shunt_terminals), p.decided_by


@pytest.mark.parametrize("at, why", [
    ("0", "it is ground"),
    ("xa.0", "it is ground"),
    ("in", "it is tied to ground by the independent voltage source vin"),  # not the first source of the netlist (vdd)
    ("xa.r", "it is tied to ground by the independent voltage source xa.vref"),  # a source inside an instance
    ("xb.r", "it is tied to ground by the independent voltage source xb.vref"),
    ("vss", "it is a .global net"),
])
def test_ac_ground_is_refused_naming_what_ties_it(at, why):
    """Ground, a .global net and a node an independent V source ties to ground are refused, naming the tie exactly."""
    # Common practice: an ideal voltage source has no AC impedance, so its node is AC ground; the message names the source.
    text = HIER.replace(".model", ".global vss\n.model").replace("Rin in g 10k\n", "Rin in g 10k\nVref r 0 dc 1.2\nRr r g 1meg\n")
    with pytest.raises(ProbeError) as info:
        break_loop(parse_text(text + "Rx mid vss 1k\n"), at)
    assert str(info.value).startswith(f"cannot break node {at}: {why}, so it is AC ground or a supply, not a loop node")


def test_a_block_wired_as_a_follower_keeps_its_pins_apart():
    """A block with its output and its inverting input on one node (a unity-gain buffer) drives it by its output and loads it by its input."""
    # By hand: the pins of a subcircuit are separate ports; inside ota, out carries M2's and M4's drains (outputs) and inn
    # only M1's gate (an input), so the loop closed by the wire from out to inn is broken between them; CL is a shunt.
    text = "follower (invented)\n" + MODELS + OTA + "Vdd vdd 0 dc 3.3\nVin in 0 dc 1.6 ac 1\nX1 in out out vdd ota\nCL out 0 1p\n"
    driver, load, shunt, _ = _sides(text, "out")
    assert (driver, load, shunt) == ({"x1.out"}, {"x1.inn"}, {"cl.p"})


def test_a_follower_block_inside_an_instance_splits_the_same_by_the_rules_and_by_driver():
    """Inside an instance the follower block's output drives, and driver= naming that pin (x1.out, local to the instance) gives the same split."""
    # By hand, as above; R1 leads from the block's node y on to the channel's pin o (a load).
    text = ("block in a channel (invented)\n" + MODELS + OTA + ".subckt chan in o vdd\nX1 in y y vdd ota\nR1 y o 1k\nCL y 0 1p\n"
            ".ends chan\nVdd vdd 0 dc 3.3\nVin in 0 dc 1.6 ac 1\nXc in o vdd chan\nRl o 0 10k\n")
    split = ({"xc.x1.out"}, {"xc.x1.inn", "xc.r1.p"}, {"xc.cl.p"})
    assert _sides(text, "xc.y")[:3] == split
    assert _sides(text, "xc.y", driver="x1.out")[:3] == split


# An invented self-biased mirror loop (test_sides.py, test_diode_connected_device_goes_whole_to_one_side) with its
# transistors written flat, and the same with each transistor in a one-device wrapper subcircuit (as process libraries do).
MIRROR = ("Vdd vdd 0 dc 3.3\nM1 d d 0 0 nch w=10u l=1u\nM2 o d 0 0 nch w=10u l=1u\nRo vdd o 20k\nM3 vdd o s 0 nch w=10u l=1u\n"
          "Rs s 0 20k\nM4 d s 0 0 nch w=2u l=1u\nRb vdd d 100k\n")
WRAPPER = ".subckt nfet d g s b\nM0 d g s b nch w=10u l=1u\n.ends nfet\n"


def test_a_diode_connected_device_wrapper_is_one_device():
    """A wrapper subcircuit of one transistor with drain and gate on the node is one device, a one-port: the split equals the flat circuit's."""
    # Reference: the flat circuit (a wrapper stands for its one device: netloop.netlist.devices); its split is checked by hand
    # in test_sides.py (M4 drives, M2's gate loads, the diode M1 is a shunt placed whole).
    flat = _sides("mirror (invented)\n" + MODELS + MIRROR, "d")
    wrapped_text = MIRROR.replace("M1 d d 0 0 nch w=10u l=1u", "X1 d d 0 0 nfet").replace("M2 o d 0 0 nch w=10u l=1u", "X2 o d 0 0 nfet")
    wrapped = _sides("mirror, wrapped (invented)\n" + MODELS + WRAPPER + wrapped_text, "d")
    assert flat[:3] == ({"m4.d"}, {"m2.g"}, {"m1.d", "m1.g", "rb.n"})
    assert wrapped[:3] == ({"m4.d"}, {"x2.g"}, {"x1.d", "x1.g", "rb.n"})
    assert "x1: several terminals on the node" in wrapped[3]


# An invented BJT cascode amplifier: Q1 (common emitter) drives e2, the emitter of the cascode Q2 (base at the DC source vb2);
# the follower Q3 and Rf close the loop to Q1's base. WRAPPER_Q is a one-device wrapper of an NPN, as process libraries write them.
BJT_CASCODE = ("bjt cascode (invented models)\n.model qn npn bf=100 is=1e-16\nVcc vcc 0 dc 5\nVb2 b2 0 dc 2\nVin in 0 dc 0.7 ac 1\n"
               "Rb in b1 1k\nQ1 e2 b1 0 qn\nQ2 c2 b2 e2 qn\nRc vcc c2 10k\nQ3 vcc c2 out qn\nRe out 0 5k\nRf out b1 100k\nCe e2 0 1p\n")
WRAPPER_Q = ".subckt npn_w c b e\nQ0 c b e qn\n.ends npn_w\n"


@pytest.mark.parametrize("at", ["e2", "c2"])
def test_a_cascode_in_a_bjt_wrapper_splits_as_the_bare_transistor(at):
    """A common-base cascode written as a one-device NPN wrapper gives the split and the sentence of the bare transistor."""
    # Reference: the flat circuit (a wrapper stands for its one device: netloop.netlist.devices). At e2 the cascode's
    # emitter is a switch-like unit (base at AC ground) placed by the bridge rule; at c2 its collector is common-base.
    flat = _sides(BJT_CASCODE, at)
    wrapped = _sides(BJT_CASCODE.replace("Vcc vcc", WRAPPER_Q + "Vcc vcc").replace("Q2 c2 b2 e2 qn", "XQ2 c2 b2 e2 npn_w"), at)
    assert wrapped[:3] == tuple({t.replace("q2.", "xq2.") for t in side} for side in flat[:3])
    assert wrapped[3] == flat[3].replace("q2", "xq2")


# A 0 V source in series has no AC impedance (common practice: ammeters in SPICE decks), so it is looked through.
SENSED = TWO_STAGE.replace("M6 out o1", "M6 y o1").replace("M7 out nb", "M7 y nb") + "Vsense y out dc 0\n"


def test_a_sense_source_goes_with_the_two_outputs_beyond_it():
    """A sense source between a push-pull output's drains and the node goes with them, and the sentence names both."""
    driver, load, shunt, text = _sides(SENSED, "out")
    assert (driver, load, shunt) == ({"vsense.n", "cc.n"}, {"rf.p"}, {"cl.p"})  # Cc: the Miller branch, below
    assert "vsense.n is a voltage source in series (no AC impedance): it goes with m6.d, m7.d on its far side" in text


def test_a_sense_source_from_a_block_output_goes_with_the_block():
    """A sense source from a block's output pin to the node drives the node like the block's output."""
    # By hand: x1's pin out carries the OTA's output drains; R1/R2 (gain of two) lead on to its input inn.
    text = ("sense from a block (invented)\n" + MODELS + OTA +
            "Vdd vdd 0 dc 3.3\nVin in 0 dc 1.6 ac 1\nX1 in fb y vdd ota\nVsense y out dc 0\nR1 out fb 10k\nR2 fb 0 10k\nCL out 0 1p\n")
    driver, load, shunt, decided = _sides(text, "out")
    assert (driver, load, shunt) == ({"vsense.n"}, {"r1.p"}, {"cl.p"})
    assert "vsense.n is a voltage source in series (no AC impedance): it goes with x1.out on its far side" in decided


def test_a_sense_source_to_a_load_capacitor_is_a_one_port():
    """A 0 V source from the node to a capacitor to ground is a one-port to AC ground: a shunt, said as such, not a load."""
    text = TWO_STAGE.replace("CL out 0 2p\n", "Vesr out c dc 0\nCL c 0 2p\n")
    _, _, split = locate_split(parse_text(text), "out")
    (vesr,) = [t for t in split.shunt if t.label == "vesr.p"]
    assert vesr.role == "shunt" and vesr.via == ""
    assert {t.label for t in split.load} == {"rf.p"}
    assert "in series" not in split.decided_by


def test_a_sense_source_to_two_gates_is_a_load_naming_them():
    """A sense source from the node to two gates is a load that goes with the gates beyond it, named in the sentence."""
    # Invented: the first stage's output o1 reaches the gates of M6 and of a replica M9 through Vs (0 V).
    text = TWO_STAGE.replace("M6 out o1", "M6 out g6") + "Vs o1 g6 dc 0\nM9 q g6 vdd vdd pch w=10u l=1u\nRq q 0 10k\n"
    _, _, split = locate_split(parse_text(text), "o1")
    (vs,) = [t for t in split.load if t.label == "vs.p"]
    assert vs.role == "load" and vs.via == "m6.g, m9.g"
    assert "vs.p is a voltage source in series (no AC impedance): it goes with m6.g, m9.g on its far side" in split.decided_by


@pytest.mark.parametrize("at, sense, side, stage", [
    ("out", "Vsense y out dc 0\n", "driver", "with cc (closes a local loop around the driver stage m6 (back to o1 through 2 passive elements)"),
    ("out", "Vsense y z dc 0\nVsense2 z out dc 0\n", "driver", "with cc (closes a local loop around the driver stage m6 (back to o1 through 2 passive elements)"),
    ("o1", "Vsense o1 g6 dc 0\n", "load", "rz on the load side (closes a local loop around the stage m6 that the node drives (on to out through 2 passive elements)"),
    ("o1", "Vsense o1 z dc 0\nVsense2 z g6 dc 0\n", "load", "rz on the load side (closes a local loop around the stage m6 that the node drives (on to out through 2 passive elements)"),
], ids=["out", "out, two sources", "o1", "o1, two sources"])
def test_a_miller_branch_finds_its_stage_through_a_sense_source(at, sense, side, stage):
    """The Miller branch Rz-Cc stays with the stage M6 it wraps when sense sources (one, or two in series) sit between the node and M6's drain or gate."""
    # Reference: the same circuit without the sense source (test_split_rules.py,
    # test_miller_branch_goes_with_the_second_stage_at_both_of_its_ends): Cc with the driver at out, Rz with the load at o1.
    wiring = {"out": ("M6 y o1", "M7 y nb"), "o1": ("M6 out g6", "M7 out nb")}[at]
    text = TWO_STAGE.replace("M6 out o1", wiring[0]).replace("M7 out nb", wiring[1]) + sense
    driver, load, _, decided = _sides(text, at)
    miller = {"out": "cc.n", "o1": "rz.p"}[at]
    assert miller in (driver if side == "driver" else load)
    assert stage in decided


def test_a_resistor_beyond_a_sense_source_is_no_stage():
    """Beyond the sense source at o1, a self-bias resistor from M6's gate to its drain is a passive element, not the stage the Miller branch wraps."""
    # By hand: only an active element is a stage (netloop/probe/sides.py); Rz-Cc wraps M6 from its gate side (o1, through the
    # 0 V source) to its drain out, as without the resistor (the test above).
    text = TWO_STAGE.replace("M6 out o1", "Rg6 g6 out 1meg\nM6 out g6") + "Vsense o1 g6 dc 0\n"
    _, load, _, decided = _sides(text, "o1")
    assert load == {"rz.p", "vsense.p"}
    assert "rz on the load side (closes a local loop around the stage m6 that the node drives (on to out through 2 passive elements)" in decided


@pytest.mark.ngspice
def test_a_sense_source_in_series_with_the_driver_leaves_t_unchanged(simulator):
    """With a 0 V source between the output drains and the node, T equals that of the circuit without it (ngspice, 1e-6)."""
    # Reference: the flat two-stage amplifier broken at out (driver side M6, M7 and the Miller branch, as checked in
    # test_split_rules.py); a 0 V source carries the same current at no voltage (common practice), so T cannot change.
    flat = break_loop(parse_text(TWO_STAGE), "out")
    sensed = break_loop(parse_text(SENSED), "out")
    _, q0, _ = probe_runs(simulator, flat, 10.0, 1e9, 5)
    _, q1, _ = probe_runs(simulator, sensed, 10.0, 1e9, 5)
    t0, t1 = tian(q0.va1, q0.vb1, q0.ib2), tian(q1.va1, q1.vb1, q1.ib2)
    np.testing.assert_allclose(t1, t0, rtol=1e-6)


PSEUDO = ("capacitive feedback with a pseudo-resistor (invented)\n" + MODELS +
          "Vin in 0 dc 1 ac 1\nCin in x 1p\nCf out x 0.5p\nMa x x m m pch w=1u l=10u\nMb out out m m pch w=1u l=10u\n"
          "E1 out 0 1.2 x 1000\nMg dx x 0 0 nch w=1u l=1u\nRd dx 0 1k\n")


@pytest.mark.parametrize("extra, with_cf", [
    ("", set()),
    ("Mc x x w w pch w=1u l=10u\nRw w 0 1meg\n", {"mc.d", "mc.g"}),  # to ground through Rw: beside nothing, a load
], ids=["pseudo-resistor", "and a diode to a leak"])
def test_a_pseudo_resistor_beside_the_feedback_capacitor_goes_with_it(extra, with_cf):
    """Two diode-connected devices in series from out to the summing node (a pseudo-resistor) go with the feedback capacitor beside
    them; a diode-connected device that leads elsewhere stays a load."""
    # By hand: no output sits on x; Cf brings the signal from E1's output out; Ma (drain and gate on x) and Mb (drain and gate
    # on out) meet at m: a two-terminal branch from out to x in parallel with Cf, so one branch with it. Cin goes to the
    # input source (AC ground): a shunt. Mc leads from x only to w and Rw to ground (its way to out would pass x itself).
    text = PSEUDO + extra
    assert _sides(text, "x")[:3] == ({"cf.n", "ma.d", "ma.g"}, {"e1.cn", "mg.g"} | with_cf, {"cin.n"})


@pytest.mark.parametrize("feedback, fed", [
    ("R1 out mid 10k\n", "r1.n"),
    ("R1 out m1 5k\nR1b m1 m2 3k\nR1c m2 mid 2k\n", "r1c.n"),  # three elements from the output: the limit, still fed
], ids=["one resistor", "three resistors"])
def test_the_net_outside_a_block_input_fed_through_a_divider_drives_it(feedback, fed):
    """Inside a block at its input pin, the net outside drives when resistors there bring the signal from an output, and says which."""
    # By hand: x1's output reaches mid through R1 (or the chain R1, R1b, R1c; R2 goes to ground); inside x1, inn is M1's gate,
    # which the chain reaches only back through mid itself.
    text = ("gain of two (invented)\n" + MODELS + OTA +
            "Vdd vdd 0 dc 3.3\nVref ref 0 dc 1.6\nX1 ref mid out vdd ota\n" + feedback + "R2 mid 0 10k\nCL out 0 1p\n")
    driver, load, _, decided = _sides(text, "x1.inn")
    assert (driver, load) == ({f"x1.inn outside x1 ({fed}, r2.p)"}, {"x1.m1.g"})
    assert f"; outside the instance, {fed} does)" in decided


@pytest.mark.parametrize("text, driver, load", [
    # R1 reaches the common-gate (cascode) drain x at one element, R2 the gate of Mg: R1 brings the signal.
    ("cascode tap (invented)\n" + MODELS + "Vdd vdd 0 dc 3.3\nVb vb 0 dc 1.5\nRl vdd x 20k\nMcg x vb s 0 nch w=10u l=1u\n"
     "Ms s in 0 0 nch w=10u l=1u\nR1 x n 10k\nR2 n g 10k\nMg o g 0 0 nch w=10u l=1u\nRo vdd o 20k\nRf o in 100k\nRi in 0 100k\n",
     "r1.n", "r2.p"),
    # R4 reaches E1's input y at one element and its output x only at two (through R6): the signal goes on through R4.
    ("tap (invented)\nE1 x 0 y 0 2\nR0 x m1 1k\nR1 m1 n 1k\nR4 n y 1k\nR6 y x 1k\nR5 y 0 1k\n", "r1.n", "r4.p"),
], ids=["cascode drain", "input sooner"])
def test_a_tap_is_driven_by_the_resistor_nearer_an_output_than_an_input(text, driver, load):
    """At a node no output sits on, the passive element that reaches an output (a common-gate drain too) no later than an input drives it."""
    # The rule of netloop/probe/sides.py (docs/splitting.md), counted by hand on each ladder.
    assert _sides(text, "n")[:2] == ({driver}, {load})


# The sentence a designer checks against the schematic (decided_by), word for word, for each way a side is decided.
# Each split is derived by hand in the test named beside it; the sentence states that split and the reason for each element.
OUTPUTS_AND_BRIDGES = (
    "driver side: m6.d, m7.d (outputs: drain, collector, controlled-source or instance output); with cc (closes a local loop "
    "around the driver stage m6 (back to o1 through 2 passive elements): kept with it); load side: rf.p; rf on the load side "
    "(leads on into the loop: it wraps no stage that the loop measured passes through); cl.p connects the node only to AC "
    "ground, which never changes T; placed on the load side (either side gives the same T).")
CASCODE_BESIDE = (
    "driver side: m4.d (outputs: drain, collector, controlled-source or instance output); with m2 (a common-gate device (gate "
    "at AC ground) beside the node's other outputs: a cascode or a switch, put with them); load side: m6.g, rz.p; rz on the "
    "load side (closes a local loop around the stage m6 that the node drives (on to out through 2 passive elements): kept with it).")
CASCODE_AND_TIED = (
    "driver side: mc2.d (common-gate or cascode devices: their gate is at AC ground, and no other output sits on the node); "
    "vsense.p is a voltage source in series (no AC impedance): it goes with m3.g on its far side; load side: vsense.p; mc4.d "
    "goes with vsense.p: its element has another terminal beyond that source, which has no AC impedance, so it is one unit "
    "across it (diode-connected).")
THROUGH = (
    "driver side: r1.n (no active output sits on the node; these bring the signal through at most 3 passive elements from a "
    "node that a drain, collector, controlled source or instance output drives, sooner than they lead on to an input); load "
    "side: rg.p; r2.p connects the node only to AC ground, which never changes T; placed on the load side (either side gives the same T).")
FOLLOWER = (
    "driver side: mp.s (outputs: drain, collector, controlled-source or instance output, or a follower's source/emitter); "
    "with cc (closes a local loop around the driver stage mp (back to gate): kept with it); load side: r1.p; r1 on the load "
    "side (leads on into the loop: it wraps no stage that the loop measured passes through); co.p connects the node only "
    "to AC ground and il.p is an independent current source (no AC current, no AC admittance), which never changes T; placed "
    "on the load side (either side gives the same T).")
ONE_PORTS = (
    "driver side: m4.d (outputs: drain, collector, controlled-source or instance output); load side: m2.g; m1.d, m1.g, rb.n "
    "connect the node only to AC ground, which never changes T; placed on the load side (either side gives the same T) (m1: "
    "several terminals on the node, a one-port placed whole, e.g. a diode connection).")


THROUGH_BRANCH = (
    "driver side: cf.n, ma.d, ma.g (no active output sits on the node; these bring the signal through at most 3 passive elements "
    "from a node that a drain, collector, controlled source or instance output drives, sooner than they lead on to an input); "
    "load side: e1.cn, mg.g; cin.n connects the node only to AC ground, which never changes T; placed on the load side (either "
    "side gives the same T).")
TWO_CASCODES = ("two cascodes (invented)\n" + MODELS + "Vdd vdd 0 dc 3.3\nVbn bn 0 dc 1.2\nVbp bp 0 dc 2\nRsp vdd sp 10k\n"
                "Mcp out bp sp vdd pch w=20u l=1u\nMcn out bn sn 0 nch w=10u l=1u\nM1 sn in 0 0 nch w=10u l=1u\nRsn vdd sn 20k\n"
                "Rl out 0 100k\nMo q out 0 0 nch w=10u l=1u\nRq vdd q 10k\nRf q in 100k\nRi in 0 100k\n")
CASCODES = (
    "driver side: mcp.d, mcn.d (common-gate or cascode devices: their gate is at AC ground, and no other output sits on the "
    "node); load side: mo.g; rl.p connects the node only to AC ground, which never changes T; placed on the load side (either "
    "side gives the same T).")
EMITTER_FOLLOWER = "emitter follower (invented model)\n.model qn npn bf=100\nVcc vcc 0 dc 5\nQ1 vcc b out qn\nRe out 0 2k\nE1 b 0 0 out 100\n"
EMITTER = (
    "driver side: q1.e (outputs: drain, collector, controlled-source or instance output, or a follower's source/emitter); load "
    "side: e1.cn; re.p connects the node only to AC ground, which never changes T; placed on the load side (either side gives "
    "the same T).")
TWO_SERIES = (
    "driver side: vsense.n (outputs: drain, collector, controlled-source or instance output); vsense.n is a voltage source in "
    "series (no AC impedance): it goes with m6.d, m7.d on its far side; vs2.p is a voltage source in series (no AC impedance): "
    "it goes with m9.g on its far side; with cc (closes a local loop around the driver stage m6 (back to o1 through 2 passive "
    "elements): kept with it); load side: rf.p, vs2.p; rf on the load side (leads on into the loop: it wraps no stage that the "
    "loop measured passes through); cl.p connects the node only to AC ground, which never changes T; placed on the load side "
    "(either side gives the same T).")
ONE_PORTS_INSIDE = (
    "driver side: xm.m4.d (outputs: drain, collector, controlled-source or instance output); load side: xm.m2.g; xm.m1.d, "
    "xm.m1.g, xm.rb.n, xm.m5.d, xm.m5.g connect the node only to AC ground, which never changes T; placed on the load side "
    "(either side gives the same T) (xm.m1, xm.m5: several terminals on the node, a one-port placed whole, e.g. a diode connection).")
TIED_LOAD = (
    "driver side: mc2.d (common-gate or cascode devices: their gate is at AC ground, and no other output sits on the node); "
    "vsense.p is a voltage source in series (no AC impedance): it goes with mc4.g, m3.g on its far side; load side: vsense.p, "
    "mc4.d; mc4.d goes with vsense.p: its element has another terminal beyond that source, which has no AC impedance, so it is "
    "one unit across it.")


@pytest.mark.parametrize("text, at, sentence", [
    (TWO_STAGE, "out", OUTPUTS_AND_BRIDGES),  # test_split_rules.py: test_miller_branch_goes_with_the_second_stage_at_both_of_its_ends
    (TWO_STAGE, "o1", CASCODE_BESIDE),  # M2's gate is at inp, a DC source: AC ground, so M2 is common-gate beside M4
    (SENSED_DIODE, "cmd", CASCODE_AND_TIED),  # test_split_rules.py: test_a_diode_connected_through_a_sense_source_goes_whole_...
    ("divider\nVin in 0 dc 0 ac 1\nE1 x 0 y 0 2\nR1 x n 1k\nR2 n 0 1k\nRg n y 1k\nCg y 0 1p\n", "n", THROUGH),  # test_sides.py divider
    (FOLLOWER_LDO, "vout", FOLLOWER),  # test_split_rules.py: Mp's drain is at vdd, its gate carries signal; Cc wraps it gate to source
    ("mirror (invented)\n" + MODELS + MIRROR, "d", ONE_PORTS),  # test_sides.py: test_diode_connected_device_goes_whole_to_one_side
    (PSEUDO, "x", THROUGH_BRANCH),  # test_a_pseudo_resistor_beside_the_feedback_capacitor_goes_with_it
    (TWO_CASCODES, "out", CASCODES),  # both drains on out are common-gate (gates at the DC sources vbn, vbp); nothing else drives
    (EMITTER_FOLLOWER, "out", EMITTER),  # Q1's collector at the supply, its base driven: its emitter drives out
    (SENSED + "Vs2 out g9 dc 0\nM9 q g9 vdd vdd pch w=10u l=1u\nRq q 0 10k\n", "out", TWO_SERIES),  # a second source, to M9's gate
    (SENSED_DIODE.replace("Mc4 cmd cmfb vdd vdd", "Mc4 cmd cmfb s4 vdd") + "Rs4 vdd s4 1k\n", "cmd", TIED_LOAD),  # Rs4 degenerates Mc4
    ("mirror in an instance (invented)\n" + MODELS + ".subckt mirror vdd\n" + MIRROR.replace("Vdd vdd 0 dc 3.3\n", "")
     + "M5 d d 0 0 nch w=1u l=1u\n.ends mirror\nVdd vdd 0 dc 3.3\nXm vdd mirror\n", "xm.d", ONE_PORTS_INSIDE),  # one more diode, M5
], ids=["outputs and bridges", "cascode beside", "cascode and tied", "through", "follower", "one-ports", "through, a branch", "two cascodes",
        "emitter follower", "two series sources", "tied load", "one-ports inside"])
def test_the_sentence_says_the_split_and_each_reason(text, at, sentence):
    """decided_by names the driver side and why, each bridge and where it went, the load side, series sources, ties and shunts."""
    _, _, split = locate_split(parse_text(text), at)
    assert split.decided_by == sentence


# An invented loop: a controlled-source amplifier, resistive feedback r1 to fb, a current source i1 from fb to out (a bias
# current between two signal nodes), and at out a 0 V sense source vs with a resistor rs across it.
_ACROSS = """current source between signal nodes, resistor across a sense source (invented)
Vin in 0 dc 0 ac 1
E1 out 0 in fb 1000
R1 out fb 1k
R2 fb 0 1k
I1 fb out dc 1u
Vs out outs dc 0
Rs out outs 1k
Cl outs 0 1p
Rf outs fb2 1k
"""


def test_a_current_source_and_a_resistor_across_a_sense_source_are_described_as_what_they_are():
    """An independent current source on the node is named as such, not as a connection to AC ground (its AC current is 0
    and an ideal source has no AC admittance, so it never changes T); a resistor across a 0 V source at the node is not
    called diode-connected (Kirchhoff: no AC voltage across it, so no AC current); a transistor there still is
    (test_split_rules.py). The sentences word for word."""
    nl = parse_text(_ACROSS)
    assert break_loop(nl, "fb").decided_by.endswith(
        "load side: e1.cn; r2.p connects the node only to AC ground and i1.p is an independent current source (no AC current, "
        "no AC admittance), which never changes T; placed on the load side (either side gives the same T).")
    assert break_loop(nl, "out").decided_by.endswith(
        "rs.p goes with vs.p: its element has another terminal beyond that source, which has no AC impedance, so it is one unit "
        "across it (no AC voltage across it, so no AC current in it); i1.n is an independent current source (no AC current, "
        "no AC admittance), which never changes T; placed on the load side (either side gives the same T).")
