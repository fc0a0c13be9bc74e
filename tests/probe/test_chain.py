"""Two splits of one node chained in one netlist: each measures its own split, both on one loaded circuit."""

from __future__ import annotations

import uuid
from pathlib import Path

import numpy as np
import pytest

from netloop.jobs.measure import Sweep, measure_probed
from netloop.netlist import parse_file
from netloop.probe import break_loop
from netloop.probe.chain import chain_probes

# circuits/sky130/ldo.cir (an invented regulator on sky130 cards): at node gate the rules put the cascode xm2 beside xm4 on
# the driver side; its other placement moves it to the load side.
LDO = Path(__file__).resolve().parents[2] / "circuits" / "sky130" / "ldo.cir"
OTHER = {"xm2": "load"}


def test_chained_netlist_puts_the_other_splits_driver_terminals_on_a_node_of_their_own():
    """The chain moves only the other split's driver terminal (xm4.d) behind a second probe, keeps the first split's
    record apart from its netlist, and names one set of sources and saves for both splits (from memory: the probe's
    series source is written V b a, the shunt source pushes current into a)."""
    parsed = parse_file(LDO)
    first = break_loop(parsed, "gate")
    chain = chain_probes(parsed, "gate", first, OTHER)
    assert chain is not None and first.driver_terminals == ("xm4.d", "xm2.d")
    other = chain.other(break_loop(parsed, "gate", placement=OTHER))
    lines = {e.name.lower(): tuple(n.lower() for n in e.nodes) for e in chain.first.netlist.elements}
    assert lines["xm4"][0] == other.side_a and lines["xm2"][0] == first.side_a and lines["xmp"][1] == "gate"
    assert lines[other.series_source] == (first.side_a, other.side_a) and lines[other.shunt_source] == ("0", other.side_a)
    assert lines[first.series_source] == ("gate", first.side_a)
    assert other.side_b == first.side_b == "gate" and other.driver_terminals == ("xm4.d",)
    assert other.excitable == chain.first.excitable and other.saves == chain.first.saves
    assert set(other.series_run_ac) == {other.series_source, other.shunt_source} != set(first.series_run_ac)
    assert chain.first.netlist is other.netlist and chain.first.vectors == first.vectors


@pytest.mark.parametrize("placement", [{"xm2": "driver"}, {"xm4": "load"}, {"xmp": "driver"}])
def test_splits_that_are_not_nested_are_not_chained(placement):
    """No chain when the other split's driver side is not a proper part of the first's (the same split, or a placement
    naming no bridge of the node, which the rules leave as they were): only a nested pair can sit in series (circuit theory)."""
    parsed = parse_file(LDO)
    first = break_loop(parsed, "gate")
    assert chain_probes(parsed, "gate", first, placement) is None


def test_a_split_inside_an_instance_is_not_chained():
    """The regulator drawn as one instance of a subcircuit: the split of x1.gate copies the definition (a change for that
    instance only), so the other split is left to a netlist of its own (from memory: chain_probes works at the top level)."""
    from netloop.jobs.measure_checks import other_placements
    from netloop.netlist import parse_text

    lines = [line for line in LDO.read_text().splitlines() if line.strip() and not line.startswith("*")]
    body = [line for line in lines[1:] if not line.lower().startswith((".param", ".lib", ".end", "vsup", "vref"))]
    parsed = parse_text("\n".join([lines[0], *(line for line in lines if line.startswith(".param")),
                                   f".lib {LDO.with_name('process.spice')} tt", ".subckt reg vin ref vout", *body, ".ends reg",
                                   "Vsup vin 0 dc {vin}", "Vref ref 0 dc {vref}", "X1 vin ref vout reg", ".end", ""]))
    first = break_loop(parsed, "x1.gate")
    assert first.copied_subcircuits and other_placements(first) == [{"x1.xm2": "load"}]
    assert chain_probes(parsed, "x1.gate", first, other_placements(first)[0]) is None


@pytest.mark.ngspice
def test_each_chained_split_measures_what_its_own_netlist_measures():
    """Both splits run on one load of the chained netlist; each one's T equals that of its own single-probe netlist loaded
    afresh to 1e-9 relative (ngspice's ac analysis of break_loop's netlist is the reference), and the second split's T on
    the loaded circuit is bit for bit that of a fresh load of the chained netlist."""
    from netloop.sim import default_simulator

    parsed = parse_file(LDO)
    first = break_loop(parsed, "gate")
    plain = break_loop(parsed, "gate", placement=OTHER)
    chain = chain_probes(parsed, "gate", first, OTHER)
    sweep = Sweep(refine=False)

    def measured(probed, simulator, circuit_id=None):
        analysis, info, _ = measure_probed(probed, simulator=simulator, sweep=sweep, circuit_id=circuit_id)
        return analysis, info.loads

    def alone(probed):
        simulator = default_simulator()
        try:
            return measured(probed, simulator)[0]
        finally:
            simulator.close()

    simulator = default_simulator()
    try:
        circuit = uuid.uuid4().hex
        (t_first, loads_first), (t_other, loads_other) = (measured(p, simulator, circuit) for p in (chain.first, chain.other(plain)))
    finally:
        simulator.close()
    assert (loads_first, loads_other) == (1, 0)
    for chained, own in ((t_first, alone(first)), (t_other, alone(plain))):
        assert np.array_equal(chained.freq_hz, own.freq_hz)
        assert np.max(np.abs(chained.t - own.t) / np.abs(own.t)) < 1e-9
    fresh = alone(chain.other(plain))
    assert np.array_equal(t_other.t, fresh.t) and t_other.margins == fresh.margins
    assert abs(t_other.margins.phase_margin_deg - t_first.margins.phase_margin_deg) > 1.0  # the two splits really differ
