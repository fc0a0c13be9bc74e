"""The what-if's paths that need no simulator: no value to solve from, a bracket with an infinite end, the sentence of
an unreachable requirement, and the range checked before anything is simulated."""

from __future__ import annotations

import math

import numpy as np
import pytest

from netloop.analysis import parse_requirements
from netloop.errors import NetloopError
from netloop.jobs.document import json_document
from netloop.jobs.sensitivity import find_knobs, sensitivities
from netloop.jobs.sensitivity.document import _what_if as what_if_document
from netloop.jobs.sensitivity.job import _what_if
from netloop.jobs.sensitivity.records import Sensitivity, Slope
from netloop.jobs.sensitivity.whatif import STEPS_PER_DECADE, XTOL_LN, _solve_between, _unreachable
from netloop.netlist import parse_text

NETLIST = """rc
vin in 0 dc 0 ac 1
r1 in out 1k
c2 out 0 2p
.end
"""
NONE = Slope(None, None)
STEP_LN = math.log(10.0) / STEPS_PER_DECADE  # one step of the march: a sixth of a decade


@pytest.fixture(scope="module")
def c2():
    return next(k for k in find_knobs(parse_text(NETLIST)) if k.name == "c2")


def _requirement(text: str):
    return parse_requirements([text])[0]


@pytest.mark.parametrize(("value", "problem", "why"), [
    (None, "the simulation failed: boom", "the simulation failed: boom"),
    (None, None, "its value could not be read"),
    (0.0, "its value is 0: a relative change is no change", "its value is 0: a relative change is no change"),
])
def test_a_knob_without_slopes_gets_no_what_if_and_says_why(c2, value, problem, why):
    """Nothing is simulated (no remeasure, simulator or loop is given): the what-if has no value and its answer says why."""
    sensitivity = Sensitivity(c2, value, NONE, NONE, NONE, NONE, (), problem)
    w = _what_if(None, None, None, None, _requirement("pm>=60"), sensitivity, (0.1, 10.0))
    assert w.answer == f"no what-if for c2: {why}"
    assert (w.value, w.solved_value, w.factor, w.check, w.edited, w.tried) == (value, None, None, None, None, ())
    assert w.span == (0.1, 10.0) and not w.confirmed
    assert w.monotonic is True  # nothing was tried, so nothing moved the wrong way


@pytest.mark.parametrize(("text", "figure"), [("pm>=60", "pm"), ("gm>=10", "gm"), ("fc>=1MHz", "fc"), ("peak<=3", "peak"),
                                              ("dc>=40", "pm"), ("mm>=0.5", "pm"), ("dm>=1ns", "pm"), ("lgm>=6", "pm")])
def test_knobs_are_ranked_for_a_requirement_by_its_own_figure_or_else_the_phase_margin(text, figure):
    """A requirement on the phase or gain margin, the crossover or the peaking ranks the knobs by that figure's slope; the
    others (DC gain, modulus, delay and lower gain margin), which have no slope of their own, by the phase margin's."""
    from netloop.jobs.sensitivity.whatif import figure_of

    assert figure_of(_requirement(text)) == figure


def test_an_unread_value_is_null_in_the_document_and_not_called_infinite(c2):
    """docs/sensitivity-json.md: a quantity that does not exist is null and its path is not a key of ``infinite``
    (there only values that exist but are infinite are listed); an unread value is as its Sensitivity's, null."""
    sensitivity = Sensitivity(c2, None, NONE, NONE, NONE, NONE, (), "the simulation failed: boom")
    w = _what_if(None, None, None, None, _requirement("pm>=60"), sensitivity, (0.1, 10.0))
    doc = json_document({"what_ifs": [what_if_document(w)]})
    assert doc["what_ifs"][0]["value"] is None and doc["what_ifs"][0]["solved_value"] is None
    assert doc["infinite"] == {}
    assert doc["what_ifs"][0]["answer"] == "no what-if for c2: the simulation failed: boom"


class _NoCrossoverBeyond:
    """A gain-margin requirement's margin against ln factor: finite and outside (not met) on one side of ``boundary``,
    infinite (no phase crossover, so met) on the other. brentq cannot take the infinite end; the boundary is ``boundary``."""

    def __init__(self, boundary: float, met_above: bool):
        self.boundary, self.met_above = boundary, met_above

    def met(self, phi: float) -> bool:
        return phi >= self.boundary if self.met_above else phi <= self.boundary

    def margin(self, phi: float) -> float:
        return math.inf if self.met(phi) else -abs(phi - self.boundary)


@pytest.mark.parametrize(("before", "after", "boundary", "met_above"), [
    (0.0, STEP_LN, 0.2, True),  # not met at the value, met one step up: the boundary from below
    (0.0, -STEP_LN, -0.25, True),  # met at the value, not met one step down
    (2 * STEP_LN, 3 * STEP_LN, 2.5 * STEP_LN, False),  # met at the step before, not after: a bracket away from the value
])
def test_a_bracket_with_an_infinite_end_is_solved_by_bisection_on_the_met_side(before, after, boundary, met_above):
    """The ln factor found is the boundary to within the solver's tolerance, and the requirement is met there."""
    figure = _NoCrossoverBeyond(boundary, met_above)
    phi = _solve_between(figure, before, after)
    assert figure.met(phi)
    assert phi == pytest.approx(boundary, abs=4 * XTOL_LN)


class _Tried:
    """The values a march saw, as _Figure.tried() gives them, and no simulation failure."""

    failure = None

    def __init__(self, tried):
        self._tried = tuple(tried)

    def tried(self):
        return self._tried


@pytest.mark.parametrize(("text", "tried", "best"), [
    ("dm>=1e-6", [(0.1, 2e-7), (1.0, 1e-7), (10.0, None)], "the best is 2e-07 s at 0.1x"),
    ("pm>=89", [(0.1, 84.25), (1.0, 60.0)], "the best is 84.25 deg at 0.1x"),
    ("fc>=1e6", [(1.0, 5e5), (10.0, 7.5e5)], "the best is 7.5e+05 Hz at 10x"),
    ("peak<=1", [(0.1, 6.0), (1.0, 3.0)], "the best is 3 dB at 1x"),
    ("pm>89", [(0.1, 84.25), (1.0, 60.0)], "the best is 84.25 deg at 0.1x"),  # strict: the largest too
    ("peak<1", [(0.1, 6.0), (1.0, 3.0)], "the best is 3 dB at 1x"),
    ("mm>=0.9", [(1.0, 0.5)], "the best is 0.5 at 1x"),
])
def test_an_unreachable_requirement_names_the_best_figure_in_its_unit(c2, text, tried, best):
    """The best figure seen (largest for >=, smallest for <=) with its unit, and the factor where it was seen."""
    answer = _unreachable(_Tried(tried), _requirement(text), c2, (0.1, 10.0), False)
    assert answer == f"{text} cannot be reached by c2 alone between 0.1x and 10x: {best}"


@pytest.mark.parametrize("span", [(1.0, 10.0), (0.1, 1.0), (0.0, 10.0), (0.1, math.inf), (2.0, 10.0)])
def test_a_range_that_does_not_hold_the_value_is_refused_before_anything_runs(span):
    """LOW < 1 < HIGH, both finite and LOW > 0: a range that does not surround the measured value is an error (no netlist is read)."""
    with pytest.raises(NetloopError, match="the range of a what-if must be LOW,HIGH factors"):
        sensitivities("no-such-netlist.cir", "out", span=span)


class _Required:
    """``pm>=60`` read from a stand-in measurement: the remeasurement below hands over the factor, and the phase margin
    is ``pm_at(factor)``, a curve drawn by hand (no simulator)."""

    op, threshold, metric, text = ">=", 60.0, "pm", "pm>=60"

    def __init__(self, pm_at):
        self.pm_at = pm_at

    def check(self, factor):
        from netloop.analysis.requirements import RequirementOutcome  # noqa: PLC0415

        pm = self.pm_at(factor)
        return RequirementOutcome(self, pm, pm >= self.threshold, "")


class _ByFactor:
    """A Remeasure whose whole measurement at a factor is that factor (what _Required reads)."""

    def whole(self, simulator, knob, factor, label=""):
        return factor, {}


def _pm_through(points):
    """The phase margin through (ln factor, pm) points, linear between them and constant beyond the ends."""
    phis, pms = zip(*sorted(points), strict=True)
    return lambda factor: float(np.interp(math.log(factor), phis, pms))


def test_the_march_steps_a_sixth_of_a_decade_and_stops_at_the_ends_of_the_range(c2):
    """pm = 50 - 8 log10(factor) deg meets pm>=60 only below 10^-1.25 = 0.056x; searched in (0.5, 10) with no slope known:
    up first, six steps of a sixth of a decade to 10x, then down, 10^(-1/6)x and 0.5x, the end of the range (not past it):
    no value in range, and the values tried are exactly those (the whatif module's docstring: six steps a decade; the
    range as sensitivities' span). The best, by hand: 50 + 8 log10(2) = 52.41 deg at 0.5x."""
    from netloop.jobs.sensitivity.whatif import solve_knob  # noqa: PLC0415

    solution = solve_knob(_ByFactor(), None, c2, _Required(lambda f: 50.0 - 8.0 * math.log10(f)), 1.0, NONE, (0.5, 10.0))
    assert solution.factor is None and not solution.met_at_value and solution.monotonic
    expected = sorted([0.5, 10 ** (-1 / 6), 1.0, *(10 ** (k / 6) for k in range(1, 7))])
    assert [f for f, _ in solution.tried] == pytest.approx(expected, rel=1e-12)
    assert solution.reason == "pm>=60 cannot be reached by c2 alone between 0.5x and 10x: the best is 52.41 deg at 0.5x"


def test_a_figure_that_turns_back_on_the_way_to_the_boundary_is_not_monotonic(c2):
    """pm rising with the value (slope +5 deg/decade) but dipping on the way: 50, 55, 52 deg at 1, 10^(1/6), 10^(2/6)x,
    then 65 deg at 10^(3/6)x. The boundary (60 deg, by hand 10^(2/6 + (8/13)/6)x on the straight piece) is found, and
    the answer says the figure did not move one way (records.WhatIf.monotonic)."""
    from netloop.jobs.sensitivity.whatif import solve_knob  # noqa: PLC0415

    required = _Required(_pm_through([(0.0, 50.0), (STEP_LN, 55.0), (2 * STEP_LN, 52.0), (3 * STEP_LN, 65.0)]))
    solution = solve_knob(_ByFactor(), None, c2, required, 1.0, Slope(5.0, None), (0.1, 10.0))
    assert solution.factor == pytest.approx(10 ** ((2 + 8 / 13) / 6), rel=1e-8)
    assert solution.monotonic is False
