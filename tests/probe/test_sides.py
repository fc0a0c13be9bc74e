"""How break_loop splits a node: driver side, load side, copies for one instance, stray AC sources, warnings."""

from __future__ import annotations

import pytest

from netloop.errors import NetlistError, ProbeError, UnknownNodeError
from netloop.netlist import parse_file, parse_text, write_netlist
from netloop.probe import break_loop

# An invented two-instance netlist: a common-source stage with a follower and local feedback,
# instantiated twice (xa, xb). Model cards are INVENTED for this test.
HIER = """hierarchical test: two copies of one stage
.model nch nmos level=1 vto=0.5 kp=20u lambda=0.05
.subckt stage in out vdd
Rin in g 10k
M1 n5 g 0 0 nch w=10u l=1u
Rd vdd n5 20k
Cd n5 0 50f
M2 vdd n5 out 0 nch w=10u l=1u
Rs out 0 20k
Rf out g 100k
.ends
Vdd vdd 0 dc 3.3
Vin in 0 dc 1 ac 1 sin(1 0.1 1k)
Iaux 0 out dc 0 ac 2 45
xa in mid vdd stage
xb mid out vdd stage
"""


def test_miller_buffer_sides(circuits):
    """On the Miller buffer the output drains drive 'out', Cc/Rz ride with them, the input gate loads it, CL may go either side."""
    nl = parse_file(circuits / "miller_buffer.cir")
    p = break_loop(nl, "out")
    assert set(p.driver_terminals) == {"m6.d", "m7.d", "cc.n"}  # the circuit's own comment names M6, M7 and Cc/Rz as the driver
    assert p.load_terminals == ("m1.g",)
    assert p.shunt_terminals == ("cl.p",)
    assert "either side" in p.decided_by and "m6.d" in p.decided_by
    assert p.side_a == "out_drive" and p.side_b == "out"
    assert p.series_source == "vnl_series" and p.shunt_source == "inl_shunt"
    assert p.vectors.save == ("v(out_drive)", "v(out)", "i(vnl_series)")
    assert p.warnings == ()


def test_input_netlist_untouched(circuits):
    """The input Netlist is equal to a fresh parse after the break (nothing is modified in place)."""
    nl = parse_file(circuits / "miller_buffer.cir")
    before = write_netlist(nl)
    break_loop(nl, "out")
    assert write_netlist(nl) == before
    assert nl == parse_file(circuits / "miller_buffer.cir")


def test_only_moved_terminals_change(circuits):
    """Every element keeps every connection except the driver terminals, which move to side a; two sources are added."""
    nl = parse_file(circuits / "miller_buffer.cir")
    p = break_loop(nl, "out")
    old = {e.key: e for e in nl.elements}
    new = {e.key: e for e in p.netlist.elements}
    assert set(new) - set(old) == {"vnl_series", "inl_shunt"}
    moved = {t.split(".")[0] for t in p.driver_terminals}
    for key, e in old.items():
        if key == "vin":
            continue
        if key in moved:
            assert new[key].nodes == tuple("out_drive" if n == "out" else n for n in e.nodes)
        else:
            assert new[key] == e
    assert new["vnl_series"].nodes == ("out", "out_drive")  # v_b - v_a = v_s (DEVELOPERS.md sign convention)
    assert new["inl_shunt"].nodes == ("0", "out_drive")  # pushes current into a


def test_stray_ac_sources_silenced():
    """Every independent source other than the probe gets AC 0; DC values and transient specs stay as written."""
    nl = parse_text(HIER)
    p = break_loop(nl, "xa.n5")
    text = write_netlist(p.netlist)
    assert "Vin in 0 dc 1 ac 0 sin(1 0.1 1k)" in text
    assert "Iaux 0 out dc 0 ac 0" in text and "45" not in text.split("Iaux")[1].splitlines()[0]
    assert "Vdd vdd 0 dc 3.3" in text
    assert set(p.silenced_sources) == {"vin", "iaux"}


def test_break_inside_one_instance():
    """A node inside xa is broken in a copy of the definition; xb and the original definition are untouched."""
    nl = parse_text(HIER)
    p = break_loop(nl, "xa.n5")
    assert p.node == "xa.n5"
    assert p.side_b == "xa.n5" and p.side_a == "xa.n5_drive"  # ngspice names inner nodes path.node (checked by 'op' in test_operating_point)
    assert p.series_source == "v.xa.vnl_series" and p.shunt_source == "i.xa.inl_shunt"
    assert p.driver_terminals == ("xa.m1.d",)
    assert p.load_terminals == ("xa.m2.g",)
    assert set(p.shunt_terminals) == {"xa.rd.n", "xa.cd.p"}
    assert p.copied_subcircuits == (("stage", "stage_broken_in_xa"),)
    orig = write_netlist(nl).splitlines()
    new = write_netlist(p.netlist).splitlines()
    assert "xb mid out vdd stage" in new  # the other instance still uses the original definition
    assert "xa in mid vdd stage_broken_in_xa" in new
    start = orig.index(".subckt stage in out vdd")
    block = orig[start:orig.index(".ends stage", start) + 1]
    at = new.index(".subckt stage in out vdd")
    assert new[at:at + len(block)] == block  # original definition unchanged


def test_a_pin_named_inside_its_instance_is_broken_there():
    """A hierarchical name that is a pin of its instance (xa.out) is broken inside that instance, between its own terminals and the net outside it."""
    nl = parse_text(HIER)
    # inside xa the follower's source drives pin out, with the stage's own feedback Rf; outside, xb.in loads the net
    with pytest.raises(ProbeError, match=r"node xa\.out is not on any loop: .*\(xa\.out outside xa \(xb\.in\)\) back to its driver side \(xa\.m2\.s, xa\.rf\.p\)"):
        break_loop(nl, "xa.out")
    looped = parse_text(HIER.replace("Vin in 0", "Rsrc src in 10k\nVin src 0") + "Rback out in 1meg\n")  # a global path from xb's output back to xa's input
    p = break_loop(looped, "xa.out")
    assert p.side_b == "mid" and p.side_a == "xa.out_drive" and p.copied_subcircuits == (("stage", "stage_broken_in_xa"),)
    assert p.driver_terminals == ("xa.m2.s", "xa.rf.p") and p.load_terminals == ("xa.out outside xa (xb.in)",)
    top = break_loop(looped, "mid")  # the top-level name splits between whole pins, as before
    assert top.side_b == "mid" and top.side_a == "mid_drive" and top.copied_subcircuits == ()
    assert top.driver_terminals == ("xa.out",) and top.load_terminals == ("xb.in",)


def test_an_input_pin_named_inside_its_instance_takes_the_outside_as_driver():
    """Inside xb at its input pin the net outside drives: the copy's pin is renamed to the driver side, the inner load keeps the node."""
    looped = parse_text(HIER.replace("Vin in 0", "Rsrc src in 10k\nVin src 0") + "Rback out in 1meg\n")
    p = break_loop(looped, "xb.in")
    assert p.side_a == "mid" and p.side_b == "xb.in" and p.series_source == "v.xb.vnl_series"
    assert p.driver_terminals == ("xb.in outside xb (xa.out)",) and p.load_terminals == ("xb.rin.p",)
    assert ".subckt stage_broken_in_xb in_drive out vdd" in write_netlist(p.netlist).splitlines()


def test_a_driver_named_deeper_than_the_node_breaks_inside_its_instance():
    """driver= naming a terminal inside an instance (xa.m2.s) on a top-level net breaks the net inside that instance."""
    looped = parse_text(HIER.replace("Vin in 0", "Rsrc src in 10k\nVin src 0") + "Rback out in 1meg\n")
    p = break_loop(looped, "mid", driver="xa.m2.s")
    assert p.side_a == "xa.out_drive" and p.side_b == "mid" and p.driver_terminals == ("xa.m2.s",)
    assert set(p.load_terminals) == {"xa.rf.p", "xa.out outside xa (xb.in)"}
    with pytest.raises(ProbeError, match=r"names terminals in different instances \(xa, xb\)"):
        break_loop(looped, "mid", driver="xa.m2.s,xb.rin")


def test_driver_override():
    """driver= puts exactly the named terminals on side a, and the sentence says so."""
    nl = parse_text(HIER)
    p = break_loop(nl, "xa.n5", driver="m1.d,rd")
    assert p.driver_terminals == ("xa.m1.d", "xa.rd.n")
    assert "driver=" in p.decided_by


def test_driver_override_unknown():
    """A driver= naming nothing on the node is a ProbeError listing the terminals there."""
    nl = parse_text(HIER)
    with pytest.raises(ProbeError, match=r"driver 'm9' has no terminal on node xa\.n5; terminals there: .*xa\.m1\.d"):
        break_loop(nl, "xa.n5", driver="m9")


def test_ground_and_supply_rejected():
    """Ground, a node tied to ground by an independent V source and a .global net cannot be broken."""
    nl = parse_text(HIER)
    with pytest.raises(ProbeError, match="it is ground"):
        break_loop(nl, "0")
    with pytest.raises(ProbeError, match="independent voltage source vdd"):
        break_loop(nl, "vdd")
    with pytest.raises(ProbeError, match="independent voltage source vdd"):
        break_loop(nl, "xa.vdd")
    g = parse_text(HIER.replace(".model", ".global vss\n.model") + "Rx mid vss 1k\n")
    with pytest.raises(ProbeError, match=r"\.global net"):
        break_loop(g, "vss")


def test_unknown_node_suggests():
    """An unknown node is an UnknownNodeError (a NetlistError) suggesting close names."""
    nl = parse_text(HIER)
    with pytest.raises(UnknownNodeError, match=r"unknown node 'xa\.n6'; did you mean 'xa\.n5'") as info:
        break_loop(nl, "xa.n6")
    assert isinstance(info.value, NetlistError)


def test_one_connection_rejected():
    """A node with one connection is a ProbeError saying so."""
    nl = parse_text(HIER + "Rdang out dangle 1k\n")
    with pytest.raises(ProbeError, match=r"dangle: it has one connection \(rdang\.n\)"):
        break_loop(nl, "dangle")


def test_node_not_on_loop():
    """A node whose load side never returns to its driver is a ProbeError naming both sides."""
    text = "open chain\nVin in 0 dc 0 ac 1\nE1 mid 0 in 0 10\nR1 mid out 1k\nR2 out 0 1k\n"
    with pytest.raises(ProbeError, match=r"node mid is not on any loop: .*\(r1\.p\) back to its driver side \(e1\.p\)"):
        break_loop(parse_text(text), "mid")


def test_no_driver_found():
    """A node whose passive parts lead to no active output within three passive elements is a ProbeError listing candidates and pointing at driver=."""
    text = ("passive ladder\nVin in 0 dc 0 ac 1\nE1 x 0 y 0 2\nR0 x m1 1k\nR1 m1 m2 1k\nR2 m2 m3 1k\nR3 m3 n 1k\n"
            "R4 n y 1k\nR5 y 0 1k\n")
    with pytest.raises(ProbeError, match=r"no driver found for node n: .*candidates: r3\.n, r4\.p; name the driver with driver="):
        break_loop(parse_text(text), "n")
    p = break_loop(parse_text(text), "n", driver="r3")
    assert p.driver_terminals == ("r3.n",) and p.load_terminals == ("r4.p",)


def test_a_passive_that_brings_the_signal_within_three_elements_drives():
    """Through at most three passive elements (this one included) a resistor that leads back to an output drives the node;
    one that reaches an active input sooner is a load (the signal goes that way)."""
    # Invented ladder: E1 drives x; R0, R1, R2 lead from x to n (three elements); R4 leads on to E1's input y.
    text = "ladder\nE1 x 0 y 0 2\nR0 x m1 1k\nR1 m1 m2 1k\nR2 m2 n 1k\nR4 n y 1k\nR5 y 0 1k\n"
    p = break_loop(parse_text(text), "n")
    assert p.driver_terminals == ("r2.n",) and p.load_terminals == ("r4.p",)
    assert "at most 3 passive elements" in p.decided_by


def test_divider_tap_driven_through_resistor():
    """A divider tap with no active output on it is driven by the resistor from the output node (an LDO's feedback tap)."""
    text = "divider\nVin in 0 dc 0 ac 1\nE1 x 0 y 0 2\nR1 x n 1k\nR2 n 0 1k\nRg n y 1k\nCg y 0 1p\n"
    p = break_loop(parse_text(text), "n")
    assert p.driver_terminals == ("r1.n",) and p.load_terminals == ("rg.p",) and p.shunt_terminals == ("r2.p",)
    assert "bring the signal through at most 3 passive elements from a node" in p.decided_by


SHARED_BIAS = """bias node shared by two amplifiers (invented)
.model nch nmos level=1 vto=0.5 kp=20u lambda=0.05
Vdd vdd 0 dc 3.3
Ib vdd nb dc 20u
M0 nb nb 0 0 nch w=10u l=1u
M1 o1 nb 0 0 nch w=10u l=1u
R1 vdd o1 50k
M2 o2 nb 0 0 nch w=10u l=1u
R2 vdd o2 50k
M3 q o1 0 0 nch w=10u l=1u
Rq vdd q 10k
"""


def test_shared_bias_node_driven_only_by_a_diode_is_on_no_loop():
    """A bias node whose only non-input connections are one-ports to AC ground (a diode-connected device, a current
    source) is driven by nothing from elsewhere: break_loop refuses it as on no loop, naming the diode connection."""
    # Circuit theory: M0 with drain and gate on nb and its source grounded is a one-port (1/gm to ground); Ib is
    # a current source. Neither carries a signal from another node into nb, so no loop can pass through it.
    with pytest.raises(ProbeError, match=r"node nb is not on any loop: besides inputs \(m1\.g, m2\.g\) only one-ports .*ib, m0.*m0: several terminals"):
        break_loop(parse_text(SHARED_BIAS), "nb")


def test_diode_connected_device_goes_whole_to_one_side():
    """A diode-connected transistor on the broken node is never split across the sides: both its terminals go together."""
    # Invented self-biased mirror loop: M1 (diode) and M2 share node d; R ties the loop back through M3.
    text = ("diode at the node\n.model nch nmos level=1 vto=0.5 kp=20u lambda=0.05\nVdd vdd 0 dc 3.3\n"
            "M1 d d 0 0 nch w=10u l=1u\nM2 o d 0 0 nch w=10u l=1u\nRo vdd o 20k\nM3 vdd o s 0 nch w=10u l=1u\n"
            "Rs s 0 20k\nM4 d s 0 0 nch w=2u l=1u\nRb vdd d 100k\n")
    p = break_loop(parse_text(text), "d")
    assert p.driver_terminals == ("m4.d",) and p.load_terminals == ("m2.g",)
    assert {"m1.d", "m1.g"} <= set(p.shunt_terminals)
    assert "m1: several terminals on the node" in p.decided_by


def test_several_loops_warn():
    """A load side that returns to the driver through two separate paths warns about several loops."""
    text = "two loops\nVin in 0 dc 0 ac 1\nG1 0 out x 0 1m\nRo out 0 10k\nE1 x 0 y 0 -1\nR1 out y 1k\nR2 y 0 1k\nE2 x2 0 out 0 1\nR3 x2 x 1k\n"
    p = break_loop(parse_text(text), "out")
    assert set(p.load_terminals) == {"r1.p", "e2.cp"}
    assert any("feeds 2 loops" in w for w in p.warnings)


def test_a_load_side_that_also_feeds_an_open_branch_warns_word_for_word():
    """A load side that also feeds a circuit that never returns to the driver (E2 copies out into R3 alone) is measured
    with that circuit's loading; the warning names it and says how to choose the split (the loop is the one of
    test_several_loops_warn without its second path)."""
    text = "one loop and an open branch\nVin in 0 dc 0 ac 1\nG1 0 out x 0 1m\nRo out 0 10k\nE1 x 0 y 0 -1\nR1 out y 1k\nR2 y 0 1k\nE2 x2 0 out 0 1\nR3 x2 0 1k\n"
    p = break_loop(parse_text(text), "out")
    assert set(p.load_terminals) == {"r1.p", "e2.cp"}
    assert p.warnings == ("the load side of out also feeds other circuits that do not return to the driver (e2), e.g. a bias "
                          "node shared by several amplifiers: their loading is included, and the split changes T; choose with driver=",)


def test_silencing_forms():
    """'ac' alone (magnitude 1 in the ngspice manual), 'ac MAG PHASE' before a distortion spec, and braces are all zeroed; 'ac 0' is left alone."""
    text = (
        "forms\nVdd vdd 0 dc 3.3\nV1 a 0 dc 1 ac\nV2 b 0 ac 0.5 90 distof1 0.1\nV3 c 0 dc 0 ac {amp}\nV4 d 0 dc 0 ac 0\n"
        "E1 out 0 x 0 10\nR1 out x 1k\nR2 x a 1k\nR3 x b 1k\nR4 x c 1k\nR5 x d 1k\n"
    )
    p = break_loop(parse_text(text), "out")
    cards = {e.key: e.card() for e in p.netlist.elements}
    assert cards["v1"] == "V1 a 0 dc 1 ac 0"
    assert cards["v2"] == "V2 b 0 ac 0 distof1 0.1"
    assert cards["v3"] == "V3 c 0 dc 0 ac 0"
    assert cards["v4"] == "V4 d 0 dc 0 ac 0"
    assert p.silenced_sources == ("v1", "v2", "v3")


def test_node_not_on_loop_lists_every_load_terminal():
    """The refusal of a node on no loop lists all its load-side terminals, comma separated, word for word."""
    # By hand: E1 drives mid; R1 and R3 lead only to resistors to ground, so no path returns from them to E1's output.
    text = "open chain\nVin in 0 dc 0 ac 1\nE1 mid 0 in 0 10\nR1 mid out 1k\nR2 out 0 1k\nR3 mid o2 1k\nR4 o2 0 1k\n"
    with pytest.raises(ProbeError) as info:
        break_loop(parse_text(text), "mid")
    assert str(info.value).endswith("node mid is not on any loop: after the split no path leads from its load side (r1.p, r3.p) back "
                                    "to its driver side (e1.p) without passing through ground or a supply")


def test_a_node_where_every_terminal_is_an_output_is_refused_naming_them():
    """A node only outputs sit on (two controlled sources) is refused: nothing would be left for the load side, and the message says why."""
    # By hand: E1's and G1's outputs both drive o; docs/splitting.md section 2 puts outputs on the driver side.
    with pytest.raises(ProbeError) as info:
        break_loop(parse_text("two outputs\nVin in 0 dc 0 ac 1\nE1 o 0 in 0 1\nG1 0 o in 0 1m\n"), "o")
    assert str(info.value).endswith(
        "node o: the rules put every terminal on the driver side (e1.p, g1.n: each is an output), so nothing is left for the load "
        "side; choose the driver side with driver=ELEMENT[.PIN], e.g. driver=e1.p")


def test_a_bias_node_inside_an_instance_names_its_one_ports_by_their_full_names():
    """Inside an instance, the refusal of a bias node on no loop names the current source and the diode by their hierarchical names."""
    # As test_shared_bias_node_driven_only_by_a_diode_is_on_no_loop, inside instance xb: Ib and the diode M0 are one-ports.
    text = ("bias in a block (invented)\n.model nch nmos level=1\n.subckt bias vdd\nIb vdd nb dc 20u\nM0 nb nb 0 0 nch\n"
            "M1 o1 nb 0 0 nch\nR1 vdd o1 50k\nM2 o2 nb 0 0 nch\nR2 vdd o2 50k\n.ends\nVdd vdd 0 3.3\nXb vdd bias\n")
    with pytest.raises(ProbeError) as info:
        break_loop(parse_text(text), "xb.nb")
    assert ("node xb.nb is not on any loop: besides inputs (xb.m1.g, xb.m2.g) only one-ports to AC ground sit on it (xb.ib, xb.m0; "
            "xb.m0: several terminals on the node, a diode connection), and nothing from elsewhere drives it") in str(info.value)



def test_a_bias_node_feeding_a_blocks_first_pin_is_on_no_loop():
    """A bias node whose only input is a block's first pin (its slot 0, where a transistor has its output) is refused as
    on no loop, as when the inputs are gates: a block's pin is an input when nothing inside drives it."""
    # Invented: the diode M0 and the current source Ib make nb; the block's first pin takes it to the gate of M1 inside.
    text = ("bias into a block (invented)\n.model nch nmos level=1\n.subckt stage bias vdd out\nM1 out bias 0 0 nch\n"
            "R1 vdd out 50k\n.ends\nVdd vdd 0 3.3\nIb vdd nb dc 20u\nM0 nb nb 0 0 nch\nX1 nb vdd o1 stage\n")
    with pytest.raises(ProbeError) as info:
        break_loop(parse_text(text), "nb")
    assert str(info.value).endswith("node nb is not on any loop: besides inputs (x1.bias) only one-ports to AC ground sit on it "
                                    "(ib, m0; m0: several terminals on the node, a diode connection), and nothing from elsewhere "
                                    "drives it")

LOOPED = HIER.replace("Vin in 0", "Rsrc src in 10k\nVin src 0") + "Rback out in 1meg\n"


@pytest.mark.parametrize("caps, shown", [
    (2, "xb.in, c0.p, c1.p"),
    (3, "xb.in, c0.p, c1.p and 1 more"),
    (4, "xb.in, c0.p, c1.p and 2 more"),
])
def test_the_net_outside_an_instance_shows_three_terminals_and_counts_the_rest(caps, shown):
    """The terminal standing for the net outside an instance names the first three terminals out there and counts the others."""
    # By hand: outside xa, mid carries xb's input pin and the capacitors C0, C1, ... to ground.
    text = LOOPED + "".join(f"C{k} mid 0 1p\n" for k in range(caps))
    p = break_loop(parse_text(text), "xa.out")
    assert p.load_terminals == (f"xa.out outside xa ({shown})",)


def test_a_copy_never_takes_the_name_of_a_subcircuit_the_netlist_defines():
    """When the netlist already defines a subcircuit named like the copy for an instance, the copy gets the next free name."""
    # Common practice: two .subckt definitions of one name are one too many (ngspice keeps one of them), so the copy must differ.
    text = HIER.replace("Vdd vdd", ".subckt stage_broken_in_xa a b\nR1 a b 1k\n.ends\nVdd vdd")
    p = break_loop(parse_text(text), "xa.n5")
    assert p.copied_subcircuits == (("stage", "stage_broken_in_xa_2"),)
    headers = [line.split()[1] for line in write_netlist(p.netlist).splitlines() if line.lower().startswith(".subckt")]
    assert len(headers) == len(set(headers)) == 3


def test_a_split_decided_on_the_original_gives_the_same_probe_inside_an_instance():
    """split_loop given locate_split's decision inside an instance builds the same netlist and sides as break_loop deciding itself."""
    # Reference: break_loop on the same netlist (the decision is the same; only who makes it differs).
    from netloop.probe.breaking import locate_split, split_loop

    nl = parse_text(HIER)
    _, check = split_loop(nl, "xa.n5", decided=locate_split(nl, "xa.n5"))
    given, own = check(), break_loop(nl, "xa.n5")
    assert write_netlist(given.netlist) == write_netlist(own.netlist)
    assert (given.side_a, given.side_b, given.driver_terminals) == (own.side_a, own.side_b, own.driver_terminals) == ("xa.n5_drive", "xa.n5", ("xa.m1.d",))


def test_a_pair_of_two_names_for_one_net_is_refused():
    """A pair naming one net twice, once inside the instance that drives it and once above, is refused as one net."""
    # By hand: xa.out is the pin of xa wired to mid, so the two names are one net (ngspice's flattened circuit has one node).
    from netloop.probe.differential import break_pair

    with pytest.raises(ProbeError) as info:
        break_pair(parse_text(LOOPED), "xa.out", "mid")
    assert str(info.value) == "nodes xa.out and mid are the same net; a differential break needs two nets"


def test_a_probed_netlist_splits_again_as_its_written_text_does():
    """A netlist break_loop returned gives the same split at another node as the text it writes, read back (a renamed pin included)."""
    # Reference: the written netlist read back by the parser, which names an instance's pins after its definition: the copy of
    # stage for xb has its pin in renamed in_drive (the net outside goes with the driver side).
    from netloop.probe.breaking import locate_split

    probed = break_loop(parse_text(LOOPED), "xb.in").netlist
    again = locate_split(probed, "mid")[2]
    read_back = locate_split(parse_text(write_netlist(probed)), "mid")[2]
    assert [t.label for t in (*again.driver, *again.load)] == [t.label for t in (*read_back.driver, *read_back.load)] == ["xa.out", "xb.in_drive"]


def test_the_probe_sources_are_the_cards_they_write():
    """The two probe sources in the new netlist equal their written cards read back: nodes, values and pin names."""
    # Reference: the parser on the written text (a V or I card's pins are p, n).
    p = break_loop(parse_text(HIER), "xa.n5")
    written = parse_text(write_netlist(p.netlist))
    sub, back = p.netlist.subcircuits["stage_broken_in_xa"], written.subcircuits["stage_broken_in_xa"]
    for key in ("vnl_series", "inl_shunt"):
        (new,) = [e for e in sub.elements if e.key == key]
        (old,) = [e for e in back.elements if e.key == key]
        assert (new.tokens, new.node_slots, new.pins) == (old.tokens, old.node_slots, old.pins)
        assert new.pins == ("p", "n")


def test_terminals_stop_at_the_nesting_guard_of_a_subcircuit_that_instantiates_itself():
    """On a subcircuit that instantiates itself, terminals_at ends at the 64-level guard (the pin a load) instead of recursing without end."""
    # Common practice: a subcircuit instantiating itself has no flattened circuit; walk_scopes refuses it at 64 levels, and the
    # terminal search has the same bound.
    from netloop.probe.scope import Scope
    from netloop.probe.sides import terminals_at

    nl = parse_text("recursive (invented)\n.subckt loop a b\nXi a b loop\nR1 a b 1k\n.ends\nE1 o 0 0 i 10\nX1 o i loop\nR2 o i 1k\n")
    roles = [(t.label, t.role) for t in terminals_at(nl, Scope((), (), ()), "o", frozenset({"0"}), frozenset())]
    assert roles == [("e1.p", "driver"), ("x1.a", "load"), ("r2.p", "load")]


def test_flat_terminals_name_a_device_wrapper_pins_after_its_definition():
    """Each terminal of a one-device wrapper takes the wrapper's pin name by position, whatever order the wrapper declares them in."""
    # Reference: the .subckt header (ngspice connects an X line's nodes to the definition's pins by position); this wrapper
    # declares its transistor's gate first.
    from netloop.probe.scope import flat_terminals

    text = ("wrapper with the gate first (invented)\n.model nch nmos level=1\n.subckt nfet_g g d s b\nM0 d g s b nch w=10u l=1u\n"
            ".ends nfet_g\nVdd vdd 0 dc 3.3\nX1 a b 0 0 nfet_g\nR1 vdd b 1k\nR2 a 0 1k\n")
    pins = [(t.element.key, t.pin, t.node) for t in flat_terminals(parse_text(text), frozenset()) if t.element.key == "x1"]
    assert pins == [("x1", "g", "a"), ("x1", "d", "b"), ("x1", "s", "0"), ("x1", "b", "0")]


# Invented: a behavioural amplifier block whose output sits behind its output resistance ro (as amplifier models have it),
# in a gain-of-2 loop; and a block whose pin goes through a protection resistor rp into an input.
_MODEL_OUT = ("amplifier models (invented)\n.subckt amp inp inn out\ne1 o 0 inp inn 1e4\nro o out 1k\n.ends\n.subckt prot in out\nrp in g 1k\n"
              "e1 out 0 g 0 2\nrl out 0 1k\n.ends\nvin in<0> 0 dc 0 ac 1\nx1 in<0> net#1 out<0> amp\nr2 out<0> net#1 10k\n"
              "r3 net#1 0 10k\nx2 out<0> y prot\nry y 0 1k\n.end\n")


def test_an_instance_output_behind_passive_elements_inside_drives_the_net_outside():
    """The block's out pin is reached inside only through ro from e1's output (one passive element), sooner than any input:
    by the rule for a node without an output on it, applied inside, the pin is an output, so the block drives out<0> (its
    loads outside: r2 and the other block's input) and, through r2, the feedback net net#1 (reference: the netlist's
    wiring, read by hand, and docs/splitting.md's rules). Before, both nodes were refused: 'no driver found'."""
    out = break_loop(parse_text(_MODEL_OUT), "out<0>")
    assert (out.driver_terminals, set(out.load_terminals)) == (("x1.out",), {"r2.p", "x2.in"})
    fb = break_loop(parse_text(_MODEL_OUT), "net#1")
    assert (fb.driver_terminals, fb.load_terminals) == (("r2.n",), ("x1.inn",))


def test_an_instance_pin_that_leads_through_a_resistor_into_an_input_is_not_an_output():
    """x2's pin in reaches, through rp, only e1's controlling input inside: it is an input of the block, a load on out<0>
    (reference: the netlist's wiring, read by hand)."""
    from netloop.probe.sides import terminals_at
    from netloop.probe.scope import walk_scopes

    netlist = parse_text(_MODEL_OUT)
    top = next(iter(walk_scopes(netlist, frozenset())))
    roles = {t.label: t.role for t in terminals_at(netlist, top, "out<0>", frozenset({"0", "in<0>"}), frozenset())}
    assert roles == {"x1.out": "driver", "r2.p": "load", "x2.in": "load"}
