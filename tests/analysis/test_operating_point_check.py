"""The check "operating-point": a node far beyond the range of the independent voltage sources makes a measurement inconclusive."""

from __future__ import annotations

import math

import pytest

from netloop.analysis.checks import OP_SPAN_FACTOR, operating_point_check

# The rule under test is our own, documented in docs/splitting.md and netloop.analysis.checks: the credible range runs
# from the lowest to the highest of the sources' voltages and ground, widened by OP_SPAN_FACTOR spans on each side.
# Each case gives the sources, then the lower and upper limits worked by hand from that rule.
CASES = [
    # one 1.8 V supply and a 0 V ammeter: range 0..1.8 V, span 1.8 V, limits -7.2 V and 9 V
    ({"vdd": 1.8, "vamm": 0.0}, -7.2, 9.0),
    # split supplies of +-5 V: range -5..5 V, span 10 V, limits -45 V and 45 V
    ({"vcc": 5.0, "vee": -5.0, "vref": 2.5}, -45.0, 45.0),
    # one negative supply of -12 V: range -12..0 V (ground is the upper end), span 12 V, limits -60 V and 48 V
    ({"vneg": -12.0}, -60.0, 48.0),
]


@pytest.mark.parametrize("sources, floor, ceiling", CASES)
@pytest.mark.parametrize("end", ["floor", "ceiling"])
def test_the_limits_fall_where_the_rule_puts_them(sources, floor, ceiling, end):
    """A node a hair inside either limit passes, a hair outside it fails, for single, split and negative supplies."""
    assert OP_SPAN_FACTOR == 4.0  # the limits above were worked with this factor
    limit = floor if end == "floor" else ceiling
    inside, outside = limit * (1 - 1e-9), limit * (1 + 1e-9)  # toward 0 V is inside: both limits lie beyond ground
    check = operating_point_check({"a": 0.5, "x": inside}, sources)
    assert check.passed and check.name == "operating-point"  # passed or not, the record is the one check of that name
    check = operating_point_check({"a": 0.5, "x": outside}, sources)
    assert not check.passed and check.name == "operating-point"
    assert f"x at {outside:.4g} V" in check.detail and "a at" not in check.detail
    assert f"{floor:.4g} V to {ceiling:.4g} V" in check.detail


def test_the_credible_range_names_the_sources_at_its_ends():
    """The detail names the range of the sources and which source (or ground) sets each end of it, as the rule reads it."""
    check = operating_point_check({"out": 1.0}, {"vamm": 0.0, "vdd": 1.8})
    assert "the range 0 V to 1.8 V of the independent voltage sources (ground to vdd)" in check.detail
    check = operating_point_check({"out": 1.0}, {"vcc": 5.0, "vee": -5.0})
    assert "the range -5 V to 5 V of the independent voltage sources (vee to vcc)" in check.detail
    check = operating_point_check({"out": -1.0}, {"vneg": -12.0, "vamm": 0.0})
    assert check.detail == ("every node of the operating point lies within the range -12 V to 0 V of the independent voltage sources "
                            "(vneg to ground) widened by 4 times its span on each side: -60 V to 48 V")


@pytest.mark.parametrize("node_v", [3.6, 5.4, -3.6])
def test_charge_pumps_and_bootstrapped_nodes_pass(node_v):
    """Nodes at 2 and 3 times a 1.8 V supply and at minus twice it, as pumps and bootstrapped nodes reach (common practice), pass."""
    assert operating_point_check({"vdd": 1.8, "boot": node_v}, {"vsup": 1.8}).passed


@pytest.mark.parametrize("sources", [{}, {"vprobe": 0.0, "vamm": 0.0}])
def test_without_a_source_that_sets_a_voltage_the_check_does_not_apply(sources):
    """With no independent voltage source, or only 0 V ones (a circuit biased by current sources), it passes as not applicable."""
    check = operating_point_check({"a": 1e6, "b": -1e6}, sources)
    assert check.passed and check.detail == ("not applicable: no independent voltage source sets a voltage other than 0 V, "
                                             "so nothing bounds the operating point")  # the sentence a report prints


def test_the_false_sky130_solution_is_flagged():
    """The sky130 regulator at ss / 125 C / 1.7 V: fb at -409 V fails, and the nodes of a real bias (vout at 1.87 V) are not named."""
    # reference: plain ngspice 39 `op` on the hand-edited netlist (benchmarks/_sky130_regulator.py, ss section of the official
    # sky130 models, .temp 125, vin=1.7), its node voltages as printed
    op = {"cesr": 0.0, "d1": 1.48933, "fb": -409.358, "gate": 2.124846e-08, "nbias": 0.7097141, "ref": 0.9, "tail": 1.468423e-08,
          "vin": 1.7, "vout": 1.867406, "xc1.a": -409.358}
    check = operating_point_check(op, {"vsup": 1.7, "vref": 0.9})
    assert not check.passed
    assert check.detail.startswith("the operating point ngspice returned is not credible: fb at -409.4 V, xc1.a at -409.4 V lie beyond")
    assert "-6.8 V to 8.5 V" in check.detail and "vout" not in check.detail
    assert "no bias of these sources reaches that: ngspice found a false solution (a device model driven far outside its range)" in check.detail
    assert "a current source drives a node that nothing else holds" in check.detail
    assert check.advice.startswith("steer ngspice to the intended bias: a .nodeset near it for v(fb), v(xc1.a), or a start-up hint")
    assert "look for a current source into a node that only a resistance holds" in check.advice


def test_the_worst_three_nodes_are_named_first():
    """Farthest first, three named and the rest counted; a voltage that is not a number is the farthest of all."""
    op = {"a": 20.0, "b": -30.0, "c": math.nan, "d": 100.0, "e": 1.0}
    check = operating_point_check(op, {"v1": 1.0})  # limits -4 V and 5 V
    assert "c at nan V, d at 100 V, b at -30 V and 1 more node(s) lie beyond" in check.detail
    assert "v(c), v(d), v(b)" in check.advice and "e at" not in check.detail
    check = operating_point_check({"a": 20.0, "b": -30.0, "d": 100.0}, {"v1": 1.0})
    assert "d at 100 V, b at -30 V, a at 20 V lie beyond" in check.detail and "more node" not in check.detail
