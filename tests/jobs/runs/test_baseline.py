"""A corner run against its baseline: the corners that moved beyond a limit, exactly, on two runs of known difference."""

from __future__ import annotations

import math

import numpy as np
import pytest
from ldo_model import AEA, BETA, CDEC, COUT, FA, KP, LAMBDA, R1, R2, W, record, spice, t_of

from netloop.jobs.runs import compare_runs, parse_limits

LOADS, ESRS = (1e-4, 1e-3, 1e-2, 1e-1), (0.1, 0.3, 1.0)
FB_POLE_HZ = 1 / (W * (R1 * R2 / (R1 + R2)) * 24e-15)  # revision B: 24 fF at fb with R1 || R2


def _run(fb_pole_hz):
    return tuple(record({"param.iload": spice(i), "param.esr": spice(e)},
                        lambda f, i=i, e=e: t_of(f, i, e, cdec=CDEC, fb_pole_hz=fb_pole_hz)) for i in LOADS for e in ESRS)


@pytest.fixture(scope="module")
def runs():
    """Revision A and revision B (a pole at about 200 MHz added at fb) over the regression plan's 12 corners."""
    return _run(None), _run(FB_POLE_HZ)


def _reference_pm(iload: float, esr: float, fb_pole_hz: float | None) -> float:
    """python-control 0.10 stability_margins on T(s) of the netlist written as a ratio of polynomials
    (tests/jobs/runs/ldo_model.py: T = beta aea gmp (1 + s esr Cout) / ((1 + s/wa)((G + s Cdec)(1 + s esr Cout) + s Cout)))."""
    import control

    gmp, g = math.sqrt(2 * KP * iload), LAMBDA * iload + 1 / (R1 + R2)
    num = np.array([BETA * AEA * gmp * esr * COUT, BETA * AEA * gmp])
    den = np.polymul([1 / (W * FA), 1], np.polyadd(np.polymul([CDEC, g], [esr * COUT, 1]), [COUT, 0]))
    if fb_pole_hz:
        den = np.polymul(den, [1 / (W * fb_pole_hz), 1])
    return control.stability_margins(control.tf(num, den))[1]


def _expected(limit_deg: float) -> set[str]:
    return {f"iload={spice(i)}/esr={spice(e)}" for i in LOADS for e in ESRS
            if _reference_pm(i, e, None) - _reference_pm(i, e, FB_POLE_HZ) > limit_deg}


@pytest.mark.parametrize("limit_deg", [2.0, 1.0])
def test_the_corners_that_fell_beyond_the_limit_and_no_others_are_regressions(runs, limit_deg):
    """With "pm may fall by at most N deg", the regressions are exactly the corners whose phase margin falls by more
    than N deg by python-control on the closed-form T(s) (one corner at 2 deg, three at 1 deg; none near the limit)."""
    a, b = runs
    drops = {f"iload={spice(i)}/esr={spice(e)}": _reference_pm(i, e, None) - _reference_pm(i, e, FB_POLE_HZ) for i in LOADS for e in ESRS}
    assert all(abs(d - limit_deg) > 0.3 for d in drops.values())  # the test is decided far from the limit
    expected = _expected(limit_deg)
    assert len(expected) == {2.0: 1, 1.0: 3}[limit_deg]
    limits = parse_limits([f"pm={limit_deg}deg"])
    cmp = compare_runs(a, b, limits, baseline_path="a.jsonl")
    assert {r.corner for r in cmp.regressions} == expected
    assert cmp.limits == tuple(limits) and {c.at for c in cmp.changes} == {"fb"}  # each change names its break node
    assert cmp.verdict == "fail" and all(r.metric == "pm" for r in cmp.regressions)
    for c in cmp.changes:
        pm = c.figure("pm")
        assert pm.delta == pytest.approx(-drops[c.corner], abs=0.02)  # netloop's margins against python-control's


def test_a_run_within_every_limit_passes(runs):
    """The same run against itself, or with a limit no corner exceeds (the largest drop by python-control plus a margin),
    has no regression: verdict "pass", the exit status 0 of --baseline; only a regression makes it "fail"."""
    a, b = runs
    assert compare_runs(a, a, parse_limits(["pm=0.5deg"]), baseline_path="a.jsonl").verdict == "pass"
    largest = max(_reference_pm(i, e, None) - _reference_pm(i, e, FB_POLE_HZ) for i in LOADS for e in ESRS)
    loose = compare_runs(a, b, parse_limits([f"pm={largest + 0.5}deg"]), baseline_path="a.jsonl")
    assert (loose.regressions, loose.verdict) == ((), "pass")


def test_a_figure_change_is_a_difference_only_between_two_finite_figures():
    """FigureChange.delta: now - before when both exist and are finite; None when either is missing or infinite (a gain
    margin with no phase crossover is +inf, as documented)."""
    from netloop.jobs.runs.baseline import FigureChange

    inf = float("inf")
    cases = {(60.0, 55.5): -4.5, (None, 55.0): None, (60.0, None): None, (inf, 20.0): None, (20.0, inf): None, (-inf, 20.0): None,
             (20.0, -inf): None, (inf, inf): None}
    assert {pair: FigureChange("gm", *pair).delta for pair in cases} == cases


def test_limits_in_other_figures_and_directions(runs):
    """peak may rise by at most 0.4 dB flags the corners whose peaking rose more (read from the records themselves);
    fc may fall by 1 % flags none (revision B moves no crossover by 1 %); a baseline against itself has no regression."""
    a, b = runs
    cmp = compare_runs(a, b, parse_limits(["peak=0.4dB", "fc=1%"]))
    rose = {c.corner for c in cmp.changes if c.figure("peak").delta > 0.4}
    assert rose and {r.corner for r in cmp.regressions} == rose and {r.metric for r in cmp.regressions} == {"peak"}
    assert compare_runs(a, a, parse_limits(["pm=0deg", "gm=0dB", "fc=0%", "peak=0dB"])).regressions == ()


def test_new_and_vanished_corners_are_listed_and_not_compared(runs):
    """A corner only in the new run is new, one only in the baseline vanished; neither is a change or a regression."""
    a, b = runs
    extra = record({"param.iload": "30m", "param.esr": "0.3"}, lambda f: t_of(f, 0.03, 0.3, cdec=CDEC))
    cmp = compare_runs(a, (*b[1:], extra), parse_limits(["pm=2deg"]))
    assert cmp.new == ((extra["corner"], "fb"),)
    assert cmp.vanished == ((b[0]["corner"], "fb"),)
    assert len(cmp.changes) == len(a) - 1 and b[0]["corner"] not in {c.corner for c in cmp.changes}


def test_a_corner_without_figures_on_either_side_is_not_compared(runs):
    """An error in the baseline or in this run is a change without figures (its own run already says why), not a regression."""
    a, b = runs
    broken = {**b[0], "outcome": "error", "loop": None, "error": "no convergence"}
    cmp = compare_runs(a, (broken, *b[1:]), parse_limits(["pm=0deg"]))
    c = next(c for c in cmp.changes if c.corner == b[0]["corner"])
    assert c.not_compared.startswith("this run has no figures") and c.regressions == () and c.figures == ()
    assert (c.outcome_before, c.outcome_now) == (a[0]["outcome"], "error") and a[0]["outcome"] != "error"  # each run's own outcome
    back = next(c for c in compare_runs((broken, *b[1:]), a, parse_limits(["pm=0deg"])).changes if c.corner == b[0]["corner"])
    assert back.not_compared == "the baseline has no figures for it (error)" and back.regressions == () and back.figures == ()
    assert (back.outcome_before, back.outcome_now) == ("error", a[0]["outcome"])
