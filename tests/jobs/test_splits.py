"""The probe's real split of each candidate, stated for loop discovery: the names a net has at each level."""

from __future__ import annotations

from netloop.graph import flatten
from netloop.jobs.splits import LoopStructure, driver_alias
from netloop.netlist import parse_file


def test_a_net_named_at_three_levels_has_its_drivers_level_name(circuits):
    """The bandgap amplifier's output net, named xreg.pbias by flattening, is named inside the amplifier block where it is driven."""
    # Reference: circuits/benches/bandgap_reg.cir: MA2 and MA4 drive the port out of bgamp (instance xamp), which the
    # bandgap block (xbg) calls pg and the regulator block (xreg) pbias; the start-up MS1 drives it one level up.
    circuit = flatten(parse_file(circuits / "benches" / "bandgap_reg.cir"))
    index = {n: i for i, n in enumerate(circuit.names)}
    assert driver_alias(circuit, "xreg.pbias", ("xreg.xbg.ms1", "xreg.xbg.xamp.ma2"), index) == "xreg.xbg.xamp.out"
    assert driver_alias(circuit, "xreg.pbias", ("xreg.xbg.ms1",), index) == "xreg.xbg.pg"
    assert driver_alias(circuit, "fb", ("r1",), index) is None  # driven at its own level


def test_a_split_that_opens_no_loop_through_its_net_fails_opens_loop(circuits):
    """The open-loop copy's only loop is its Miller branch: Rz on the load side at xol.o1 opens nothing, on the driver side it opens it."""
    # Reference: circuits/benches/tb_open_copy.cir header (the copy has only its Miller loop xol.o1 -> M6 -> olout -> Cc/Rz ->
    # xol.o1) and its expert deck expert/tb_open_copy.xol.o1.sp (Rz on the driver side: the loop is opened).
    nl = parse_file(circuits / "benches" / "tb_open_copy.cir")
    s = LoopStructure(nl, "xol.o1")
    closed, opened = s.opens_check("xol.o1", {"xol.rz": "load"}), s.opens_check("xol.o1", {"xol.rz": "driver"})
    assert not closed.passed and "opens none of the 1 loop(s)" in closed.detail and closed.advice
    assert opened.passed


def test_a_net_named_above_the_block_that_drives_it_has_its_deeper_name(circuits):
    """The regulator's pbias is the bandgap's pg and its amplifier's out: the deeper name is the one inside the amplifier, which drives it."""
    # Reference: circuits/benches/bandgap_reg.cir header (out, pg and pbias are one net, driven by MA2 and MA4 inside xamp).
    nl = parse_file(circuits / "benches" / "bandgap_reg.cir")
    s = LoopStructure(nl, "xreg.pbias")
    assert s.alias("xreg.pbias") == "xreg.xbg.xamp.out" and s.alias("xreg.xbg.xamp.out") is None
    check = s.opens_check("xreg.pbias")
    assert not check.passed and "--at xreg.xbg.xamp.out" in check.advice
