"""Central differences and their stated error, on functions whose derivatives are known exactly."""

from __future__ import annotations

import math

import pytest

from netloop.jobs.sensitivity.records import STEPS, Slope, central_difference

LN10 = math.log(10.0)


def test_central_difference_of_a_cubic_and_its_error():
    """For F = phi^3 + 2 phi the central difference is 2 + h^2 and its estimated error is exactly h^2 (calculus)."""
    h = 0.01
    values = {k: (k * h) ** 3 + 2 * (k * h) for k in STEPS}
    slope = central_difference(values, h)
    assert slope.per_decade == pytest.approx((2 + h * h) * LN10, rel=1e-12)
    assert slope.error == pytest.approx(h * h * LN10, rel=1e-6)
    assert slope.relative_error == pytest.approx(h * h / (2 + h * h), rel=1e-6)


def test_a_missing_figure_gives_no_slope():
    """When the figure does not exist at one of the four values (no crossover there), there is no slope."""
    values = {1: 1.0, -1: 0.5, 2: None, -2: 0.2}
    assert central_difference(values, 0.01) == Slope(None, None)
    assert Slope(None, None).relative_error is None


def test_the_runs_verdict_is_the_loops_and_fail_when_a_solved_value_does_not_hold_up():
    """SensitivityRun.verdict: inconclusive when the measured loop is (whatever the what-ifs), else "fail" when a what-if
    measured afresh at its solved value misses its requirement, else the loop's own verdict; a what-if that solved
    nothing (no fresh check) or that held up changes nothing (by construction: the records are given)."""
    from types import SimpleNamespace

    from netloop.jobs.sensitivity.records import SensitivityRun

    def run(verdict, *what_ifs):
        return SensitivityRun(nominal=SimpleNamespace(verdict=verdict), at="out", step=0.1, rank_by="pm", sensitivities=(),
                              what_ifs=tuple(SimpleNamespace(check=c, confirmed=ok) for c, ok in what_ifs), withheld=None,
                              window_count=0, workers=1, seconds=0.0)

    checked = object()
    assert run("inconclusive", (checked, False)).verdict == "inconclusive"
    assert run("pass", (checked, False)).verdict == "fail" and run("pass", (checked, True), (checked, False)).verdict == "fail"
    assert run("pass", (None, False)).verdict == "pass" and run("pass", (checked, True)).verdict == "pass"
    assert run("fail").verdict == "fail" and run("pass").verdict == "pass"


def test_a_slopes_relative_error_and_the_whole_sweeps_it_needed():
    """Slope.relative_error: error / |per decade|, None when either is missing, inf for a zero slope with an error and 0
    for a zero slope without one; Sensitivity.whole_sweeps counts the changed values that needed a whole sweep."""
    from types import SimpleNamespace

    from netloop.jobs.sensitivity.records import Sensitivity, Slope

    cases = {(None, 0.1): None, (2.0, None): None, (None, None): None, (-2.0, 0.1): 0.05, (0.0, 0.1): math.inf, (0.0, 0.0): 0.0}
    assert {pair: Slope(*pair).relative_error for pair in cases} == cases
    probes = tuple(SimpleNamespace(whole_sweep=w) for w in (True, False, True, False))
    flat = Slope(None, None)
    assert Sensitivity(None, 1e-12, flat, flat, flat, flat, probes).whole_sweeps == 2


def test_the_remembering_simulator_reports_the_backend_and_processes_of_the_one_it_wraps():
    """The sensitivity job's wrapper passes on what the measurement records of its simulator: the backend's name (the
    class's name when it has none) and its ngspice processes (none when it has no list of them)."""
    from netloop.jobs.sensitivity.job import _Remembering

    class Plain:
        pass

    class Shared:
        backend = "shared"
        simulators = ["ngspice 1", "ngspice 2"]

    assert (_Remembering(Plain()).backend, _Remembering(Plain()).simulators) == ("Plain", ())
    assert (_Remembering(Shared()).backend, _Remembering(Shared()).simulators) == ("shared", ("ngspice 1", "ngspice 2"))
