"""What a LoopResult promises: its verdict (netloop.jobs.loop_result.VERDICTS), and the rules of common practice said
beside a PASS, on closed-form loops analysed by netloop.analysis.analyse. The figures each rule reads are computed here
from the closed form alone (scipy.optimize.brentq on |T(jw)| = 1 and on the phase, the closed loop's peak on a dense
grid), so that which rules a loop misses follows from the circuit, not from the code under test."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from scipy.optimize import brentq

from netloop.analysis import analyse, parse_requirements
from netloop.analysis.results import Check
from netloop.jobs.loop_result import COMMON_PRACTICE, BreakInfo, LoopResult, SimInfo

FREQ_HZ = np.logspace(0, 10, 401)
# (DC gain, poles in Hz): a loop's T(s) = a0 / prod(1 + s / (2 pi p))
LOOPS = {
    "comfortable": (1e4, (1e3, 3e7, 1e8)),  # phase margin about 67 deg
    "marginal": (1e3, (1e3, 1e6, 2e6)),  # stable, phase margin about 33 deg, gain margin under 10 dB
    "unstable": (1e4, (1e3, 1e6, 2e6)),
    "quiet": (0.1, (1e3,)),  # never reaches 0 dB: no phase margin exists
}


def _t(name: str, f):
    a0, poles = LOOPS[name]
    s = 2j * math.pi * np.asarray(f, dtype=float)
    return a0 / np.prod([1 + s / (2 * math.pi * p) for p in poles], axis=0)


def _closed_form(name: str) -> dict[str, float | None]:
    """The figures COMMON_PRACTICE reads, from T alone: phase margin (deg), gain margin (dB), closed-loop peaking (dB
    above the in-band level |T0/(1+T0)|, or 0 dB when |T0| <= 1); None for a margin that does not exist."""
    dense = np.logspace(0, 10, 200_001)
    t = _t(name, dense)
    phase = np.unwrap(np.angle(t))  # continuous from the bottom, where T is real and positive

    def phase_at(f: float) -> float:
        return float(np.interp(math.log10(f), np.log10(dense), phase))

    pm = gm = None
    if abs(t[0]) > 1 > abs(t[-1]):
        fc = brentq(lambda f: abs(_t(name, f)) - 1.0, dense[0], dense[-1], xtol=1e-12, rtol=1e-14)
        pm = 180.0 + math.degrees(phase_at(fc))
    below = np.flatnonzero(phase <= -math.pi)
    if below.size:
        f180 = brentq(lambda f: phase_at(f) + math.pi, dense[below[0] - 1], dense[below[0]], xtol=1e-12, rtol=1e-14)
        gm = -20.0 * math.log10(abs(_t(name, f180)))
    level = abs(t[0] / (1 + t[0])) if abs(t[0]) > 1 else 1.0
    return {"pm": pm, "gm": gm, "peak": 20.0 * math.log10(float(np.max(np.abs(t / (1 + t)))) / level)}


def _result(name: str, requirements: tuple[str, ...] = (), checks: tuple[Check, ...] = ()) -> LoopResult:
    analysis = analyse(FREQ_HZ, _t(name, FREQ_HZ))
    return LoopResult("loop.cir", name, "tian", BreakInfo("out", "out_drive", "out", ("e1.p",), ("r1.n",), (), "why", ()),
                      analysis, tuple(r.check(analysis) for r in parse_requirements(requirements)), (), (),
                      SimInfo("analytic", FREQ_HZ.size, 0, True, None, None, 0.0), checks=checks)


def test_the_closed_forms_are_the_loops_the_names_say():
    figures = {name: _closed_form(name) for name in LOOPS}
    assert figures["comfortable"]["pm"] == pytest.approx(67, abs=1) and figures["marginal"]["pm"] == pytest.approx(33, abs=1)
    assert figures["marginal"]["gm"] < 10 < figures["comfortable"]["gm"] and figures["marginal"]["peak"] > 3
    assert figures["quiet"]["pm"] is None and figures["quiet"]["gm"] is None


@pytest.mark.parametrize("name", ["comfortable", "marginal", "quiet"])
def test_a_passing_loop_is_told_the_rules_of_common_practice_it_misses_and_only_those(name):
    """No requirement given and the verdict "pass": the rules of COMMON_PRACTICE whose figure the closed form misses,
    each with netloop's figure for it; a margin that does not exist (the quiet loop's) is no shortfall."""
    result = _result(name)
    figures = _closed_form(name)
    limits = {"pm": (45.0, 1), "gm": (10.0, 1), "peak": (3.0, -1)}  # (limit, +1 for a floor, -1 for a ceiling)
    missed = [m for m, (limit, sense) in limits.items() if figures[m] is not None and sense * (figures[m] - limit) < 0]
    assert (result.verdict, result.passed, result.failed_requirements) == ("pass", True, ())
    said = result.below_common_practice
    assert [o.requirement.text for o in said] == [r for r in COMMON_PRACTICE if r.split("<")[0].split(">")[0] in missed]
    assert all(not o.passed and o.value == pytest.approx(figures[o.requirement.metric], abs=0.05) for o in said)
    assert name != "marginal" or len(said) == 3


def test_nothing_is_said_beside_a_fail_or_when_requirements_were_given():
    """The rules of thumb stand in for requirements not given, and only beside a PASS."""
    assert _result("unstable").verdict == "fail" and _result("unstable").below_common_practice == ()
    given = _result("marginal", ("pm>=30",))
    assert (given.verdict, given.below_common_practice) == ("pass", ())


def test_the_verdict_is_inconclusive_when_a_self_check_failed_whatever_the_margins():
    """VERDICTS: "inconclusive" when a self-check failed (never pass, never fail), else "pass" when stable with every
    requirement met, else "fail"; passed only for "pass"; the failed requirements are those not met, in order."""
    doubt = Check("nyquist-data", False, "the phase jumps between two samples", "sweep denser")
    fine = Check("nyquist-data", True, "the phase moves smoothly", "")
    for name in ("comfortable", "unstable"):
        result = _result(name, ("pm>=45",), checks=(doubt,))
        assert (result.verdict, result.passed, result.failed_checks) == ("inconclusive", False, (doubt,))
        assert result.below_common_practice == ()
    assert _result("comfortable", checks=(fine,)).verdict == "pass"
    failing = _result("comfortable", ("pm>=80", "gm>=10", "pm>=90"))
    assert (failing.verdict, failing.passed) == ("fail", False)
    assert [r.requirement.text for r in failing.failed_requirements] == ["pm>=80", "pm>=90"]
    unstable = _result("unstable")
    assert (unstable.verdict, unstable.passed, unstable.stable) == ("fail", False, False)
    assert _result("comfortable").stable and replace(_result("comfortable"), requirements=()).passed
