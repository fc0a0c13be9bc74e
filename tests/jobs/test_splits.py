"""The probe's real split of each candidate, stated for loop discovery: the names a net has at each level."""

from __future__ import annotations

import logging

from netloop.graph import flatten
from netloop.jobs.discover import discover_loops
from netloop.jobs.splits import DEFAULT_SPLIT_CHECKS, LoopStructure, driver_alias
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


def test_a_net_on_no_loop_has_no_group_and_no_opens_loop_check(circuits):
    """The Miller buffer's input inp, held by Vin, is on no loop: no group, no fates, no opens-loop check, no deeper name."""
    # Reference: circuits/miller_buffer.cir header (Vin drives M2's gate at inp; the only feedback wire is out -> M1's gate),
    # and LoopStructure.opens_check's docstring (None when no loop found passes through the net).
    s = LoopStructure(parse_file(circuits / "miller_buffer.cir"), "inp")
    assert s.group is None
    assert (s.fates("inp"), s.opens_check("inp"), s.alias("inp")) == ((), None, None)


def test_discovery_breaks_the_bandgap_loop_under_its_drivers_name_and_says_so_on_the_status_line(circuits, caplog):
    """Loop discovery states the bandgap loop's best break at pbias under its name inside the amplifier (its ``at``), names the
    group by it, and the status line counts the candidates whose split it works out."""
    # Reference: circuits/benches/bandgap_reg.cir header (xreg.pbias = xreg.xbg.pg = xreg.xbg.xamp.out, one net driven by
    # the amplifier's MA2/MA4 inside xamp; the start-up MS1 one level up), as test_a_net_named_above_the_block_that_drives_it
    # above; the status line is the one netloop.cli.status shows (INFO on the "netloop" logger), at most DEFAULT_SPLIT_CHECKS
    # candidates a group.
    with caplog.at_level(logging.INFO, logger="netloop"):
        found = discover_loops(circuits / "benches" / "bandgap_reg.cir")
    bandgap, regulation = found.groups
    pbias = next(c for c in bandgap.candidates if c.node == "xreg.pbias")
    assert (pbias.at, pbias.break_name) == ("xreg.xbg.xamp.out", "xreg.xbg.xamp.out")
    assert bandgap.label == "loop 1 (xreg.xbg.xamp.out)" and regulation.label == "loop 2 (fb)"
    assert all(c.at == "" for c in regulation.candidates)  # each of its nets is named at the level of the block that drives it
    status = [r.getMessage() for r in caplog.records if r.getMessage().startswith("working out")]
    assert status == [f"working out the probe's split at the best {min(DEFAULT_SPLIT_CHECKS, len(g.candidates))} break nodes of loop {g.index} "
                      f"({s})" for g, s in ((bandgap, "xreg.pbias"), (regulation, "fb"))]


def test_both_ends_of_a_zero_volt_sense_source_open_the_loop_through_it():
    """A three-stage ring whose second stage reaches its load through a 0 V current sense (Vsense c cs 0): c and cs are one
    loop node for AC, and a break at either end opens the loop, the sense source's far terminal standing for what sits
    beyond it (circuit theory: a 0 V source has no AC impedance)."""
    from netloop.jobs.discover import take_census
    from netloop.netlist import parse_text

    ring = ("three-stage ring with a 0 V current sense (invented)\nG1 0 b a 0 2m\nRb b 0 1k\nCb b 0 1n\nG2 0 c b 0 2m\n"
            "Vsense c cs 0\nRc cs 0 1k\nCc cs 0 1n\nG3 a 0 cs 0 2m\nRa a 0 1k\nCa a 0 1n\n.end\n")
    (group,) = take_census(parse_text(ring), sweep=False).groups
    by = {c.node: c for c in group.group.candidates}
    assert (by["c"].driver_side, by["c"].opened, by["c"].opens_all) == (("g2.n",), (1,), True)
    assert (by["cs"].driver_side, by["cs"].opened, by["cs"].opens_all) == (("vsense.n",), (1,), True)
    assert by["cs"].drivers == ("vsense",)
