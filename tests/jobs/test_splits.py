"""The probe's real split of each candidate, stated for loop discovery: the names a net has at each level."""

from __future__ import annotations

from netloop.graph import flatten
from netloop.jobs.splits import driver_alias
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
