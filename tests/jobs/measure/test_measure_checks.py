"""The job checks behind "inconclusive" (netloop.jobs.measure_checks): split, second-break and closed-loop-pz, as a user reads them."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

import netloop.jobs.measure as measure_module
from netloop.analysis import analyse
from netloop.cli.main import exit_status
from netloop.jobs.measure import measure
from netloop.jobs.measure_checks import PZ_UNEXPLAINED, Trial, second_break_check
from netloop.netlist import parse_text
from netloop.probe import break_loop
from netloop.probe.sides import Bridge
from netloop.report.text import verdict_line
from netloop.sim import AnalyticSimulator

A0, W1, W2 = 1000.0, 2 * math.pi * 1e3, 2 * math.pi * 1e6

# one half of tests/jobs/test_measure_pair.py TIE (invented): cx1 is as close to the driver stage ga1 as to the stage gb1
# that np drives, so the rules put it with the load as a default left to the checks (tests/probe/test_split_rules.py)
TIE = ("bridge as close to both stages (invented)\nga1 0 np gp 0 1m\nra1 np 0 10k\nca1 np 0 1p\ngb1 ob 0 np 0 1m\nrb1 ob 0 10k\n"
       "cb1 ob 0 2p\ncx1 np xp 0.1p\nr11 xp gp 1k\nr21 xp ob 1k\nrf1 ob gp 10k\nrg1 gp 0 10k\n.end\n")
# a one-stage loop (invented): rf is the only load at out, so moving it to the driver side leaves no load (break_loop refuses)
ONE_STAGE = "one-stage loop (invented)\nvin in 0 dc 0 ac 1\nrin in x 10k\nrf out x 100k\ne1 out 0 0 x 1e4\nrl out 0 1k\n.end\n"
# a block's output net named again outside (invented): o has no bridging element, and xamp.out is its deeper name
NAMED_TWICE = ("a block whose output net is named again outside (invented)\n.subckt amp inp inn out\ne1 out 0 inp inn 1e4\n"
               "ro out 0 1k\n.ends\nvin in 0 dc 0 ac 1\nxamp in fb o amp\nef fb 0 o 0 0.1\n.end\n")


def _two_pole(f, gain: float = A0):
    """T(s) = gain / ((1 + s/w1)(1 + s/w2)): a stable two-pole loop (circuit theory)."""
    s = 2j * math.pi * np.asarray(f, dtype=float)
    return gain / ((1 + s / W1) * (1 + s / W2))


def _leaky(f):
    """The two-pole T plus 0.5: a path around the probe keeps |T| at 0.5 (-6.02 dB) at the top of any sweep."""
    return _two_pole(f) + 0.5


def _unstable_alone(f):
    """T(s) = A0 / ((1 - s/w1)(1 + s/w2)): one right-half-plane pole of T itself (an opened circuit unstable by itself)."""
    s = 2j * math.pi * np.asarray(f, dtype=float)
    return A0 / ((1 - s / W1) * (1 + s / W2))


# the closed-loop poles of _unstable_alone, roots of (1 - s/w1)(1 + s/w2) + A0 = 0 (numpy.roots): one in each half plane,
# their product -(1 + A0) w1 w2 being negative
UNSTABLE_ROOTS = np.roots(np.polymul([-1 / W1, 1.0], [1 / W2, 1.0]) + np.array([0.0, 0.0, A0]))


class _Breaks(AnalyticSimulator):
    """Answers every break of a job as an ideal voltage-driven break of the loop ``pick(netlist)`` gives:
    v(X_drive) = -T/(1+T), v(X) = 1/(1+T) per volt of the series source, no current through it."""

    def __init__(self, pick):
        super().__init__({})
        self.pick = pick

    def run(self, job):
        t = self.pick(job.netlist)
        for i, name in enumerate(job.save):
            if name.startswith("i("):
                source = name[2:-1]
                self.responses[job.save[i - 2]] = lambda f, ac, s=source: -t(f) / (1 + t(f)) * ac[s]
                self.responses[job.save[i - 1]] = lambda f, ac, s=source: 1 / (1 + t(f)) * ac[s]
                self.responses[name] = lambda f, ac: 0 * f
        return super().run(job)


def _cx1_moved(netlist: str) -> bool:
    """Whether cx1 sits on the driver side of the probe (its first node the probe's driven node np_drive)."""
    return "\ncx1 np_drive " in netlist


@pytest.mark.parametrize("gain_moved, verdict", [(A0, "pass"), (2 * A0, "inconclusive")])
def test_a_second_break_that_finds_other_poles_makes_the_verdict_inconclusive(gain_moved, verdict):
    """With cx1 moved the second break measures T again: the same T passes second-break, a T of twice the gain (an invented
    defect) fails it, and the failure reads INCONCLUSIVE (exit 3) with the reason and what to try, never PASS."""
    # Reference: two exact breaks of one circuit find the same closed-loop poles (Bode's return ratio; Tian et al. 2001).
    # For the two-pole loop the poles are the roots of s^2/(w1 w2) + s (1/w1 + 1/w2) + 1 + gain (numpy.roots): their
    # modulus is sqrt((1 + gain) w1 w2), so twice the gain moves the pair by over 40 %, far beyond the 2 % two breaks allow.
    result = measure(TIE, "np", simulator=_Breaks(lambda nl: (lambda f: _two_pole(f, gain_moved)) if _cx1_moved(nl) else _two_pole))
    (second,) = [c for c in result.checks if c.name == "second-break"]
    assert result.verdict == verdict and exit_status(result.verdict) == {"pass": 0, "inconclusive": 3}[verdict]
    assert second.detail.startswith("a second break, cx1 to the driver side: the closed-loop poles below ")
    if verdict == "pass":
        assert second.passed is True and second.advice == ""
        return
    # the closed form's poles, each to the nearest of the other break's, relative to its own modulus (as poles_agree reads them)
    pa, pb = (np.roots([1 / (W1 * W2), 1 / W1 + 1 / W2, 1 + g]) for g in (A0, 2 * A0))
    worst = max(max(np.min(np.abs(y - p)) / abs(p) for p in x) for x, y in ((pa, pb), (pb, pa)))
    assert second.passed is False and result.failed_checks == (second,)
    assert second.detail.endswith(f"differ by at most {worst:.2g} (relative); "
                                  "two exact breaks of one circuit must find the same closed-loop poles")
    advice = "sample more densely (raise --ppd), or break the loop at another node and compare (netloop compare)"
    assert second.advice == advice
    assert verdict_line(result) == f"INCONCLUSIVE  the data supports no verdict: {second.detail}; try: {advice}"


# the falls-at-top clause of netloop.analysis.checks for _leaky: |T| = 0.5 at the top, 20 log10(0.5) dB
LEAK = (f"the sweep ends at 1e+10 Hz with |T| still {20 * math.log10(0.5):.4g} dB, not below -20 dB: the loop has gain beyond the "
        "sweep, or a path around the probe keeps |T| from falling (an element that bridges the split, left on the side where it "
        "closes the loop)")
RHP = ("T has 1 right-half-plane pole(s) of its own: the opened circuit is unstable by itself, and margins read off such a T are "
       "not the usual ones")
TRY = ("name the driver side with --driver, break the loop at another node (netloop loops NETLIST lists the candidates and what "
       "each opens), or widen the sweep")


@pytest.mark.parametrize("netlist, at, pick, verdict, passed, detail", [
    # the rules' split leaks, cx1 on the driver side does not: that placement is reported, and why
    (TIE, "np", lambda nl: _two_pole if _cx1_moved(nl) else _leaky, "pass", True,
     f"cx1 to the driver side: with the rules' split, {LEAK}; with this one every self-check passes and T has no right-half-plane pole"),
    # every split leaks and the only other placement cannot be built: inconclusive, saying so
    (ONE_STAGE, "out", lambda nl: _leaky, "inconclusive", False,
     f"no placement of the bridging elements (rf) passes the self-checks: as split, {LEAK}; tried no other placement could be built"),
    # no bridge to move, and the net's deeper name leaks too: inconclusive, naming only what was tried
    (NAMED_TWICE, "o", lambda nl: _leaky, "inconclusive", False,
     f"no other name of the net (xamp.out) passes the self-checks: as split, {LEAK}; tried broke the net as xamp.out: {LEAK}"),
    # T has a pole of its own in every placement, no check fails: the rules' split is kept and the check passes
    (TIE, "np", lambda nl: _unstable_alone, "fail", True,
     f"kept the rules' placement ({RHP}); no other placement did better: tried cx1 to the driver side: {RHP}"),
])
def test_the_split_check_says_what_was_tried(monkeypatch, netlist, at, pick, verdict, passed, detail):
    """The job check "split" settles a doubted split: the placement that passes, or inconclusive with what was tried and what
    to try, or the rules' split kept when none did better; word for word, with its verdict."""
    # Reference: docs/splitting.md "How a split is settled" (our rules); a T that levels off at the top has a path around the
    # probe (netloop.analysis.checks falls-at-top). ngspice's pz is replaced by the closed form's own roots (UNSTABLE_ROOTS).
    monkeypatch.setattr(measure_module, "node_poles", lambda text, node, workdir=None: UNSTABLE_ROOTS)
    result = measure(netlist, at, simulator=_Breaks(pick))
    (split,) = [c for c in result.checks if c.name == "split"]
    assert (result.verdict, split.passed, split.detail) == (verdict, passed, detail)
    assert split.advice == ("" if passed else TRY)
    if not passed:
        assert verdict_line(result).endswith(f"; try: {result.failed_checks[0].advice}") and exit_status(result.verdict) == 3


# a pole far above the sweep (1e13 rad/s), in the right half plane: ngspice finding one the data cannot show
FAR_RHP = np.array([1e13 + 0j])


@pytest.mark.parametrize("poles, passed", [(UNSTABLE_ROOTS, True), (np.concatenate([UNSTABLE_ROOTS, FAR_RHP]), False)])
def test_the_closed_circuit_poles_must_number_z(monkeypatch, poles, passed):
    """When T has a right-half-plane pole of its own, the closed circuit's own poles must number Z = N + P in the right half
    plane: the roots of the characteristic polynomial agree; the same roots with one more right-half-plane pole, above the
    sweep where the data cannot see it, explain the data as well but number 2: the data cannot say which is right."""
    # Reference: the Nyquist criterion Z = N + P (Nyquist 1932); Z here is 1, one root of (1 - s/w1)(1 + s/w2) + A0 (numpy.roots).
    monkeypatch.setattr(measure_module, "node_poles", lambda text, node, workdir=None: poles)
    result = measure(TIE, "np", simulator=_Breaks(lambda nl: _unstable_alone))
    (pz,) = [c for c in result.checks if c.name == "closed-loop-pz"]
    found = "ngspice's pole analysis of the closed circuit finds {} right-half-plane pole(s); Z = N + P = 1"
    if passed:
        assert (pz.passed, pz.detail, result.verdict) == (True, found.format(1), "fail")
        return
    misfit = found.format(2) + ": P read from the data does not fit the circuit"
    assert (pz.passed, pz.detail, result.verdict) == (False, misfit, "inconclusive")
    assert pz.advice == "give the opened loop's right-half-plane pole count with --open-loop-rhp-poles, or break the loop at another node"


def test_poles_that_do_not_explain_the_data_check_nothing(monkeypatch):
    """ngspice's pole search can fail and list poles that are not the circuit's (slow_biquad.cir: one pole eighteen times).
    The closed circuit's roots mirrored into the left half plane are such a list: their terms differ from the roots' own by
    an all-pass factor on the jw axis, so no sum over them gives the measured 1/(1+T). The check is then not applicable
    (passed, saying why) and the verdict is the data's own: unstable, as the roots say."""
    # Reference: the Nyquist criterion Z = N + P (Nyquist 1932): Z = 1 from the roots of (1 - s/w1)(1 + s/w2) + A0 (numpy.roots);
    # netloop.analysis.poles.unexplained_share measures how much of 1/(1+T) a pole list leaves unexplained (PZ_UNEXPLAINED).
    mirrored = -np.abs(UNSTABLE_ROOTS)
    monkeypatch.setattr(measure_module, "node_poles", lambda text, node, workdir=None: mirrored)
    result = measure(TIE, "np", simulator=_Breaks(lambda nl: _unstable_alone))
    (pz,) = [c for c in result.checks if c.name == "closed-loop-pz"]
    assert pz.passed and pz.detail.startswith("not applicable: ngspice's pole analysis of the closed circuit gave 2 pole(s) that leave ")
    share = int(pz.detail.split("leave ")[1].split("%")[0])
    assert share > 100 * PZ_UNEXPLAINED
    assert pz.detail.endswith("% of the measured 1/(1+T) unexplained (its pole search failed), so they check nothing")
    assert result.verdict == "fail" and result.analysis.nyquist.closed_loop_rhp_poles == 1


@pytest.mark.parametrize("side, other", [("load", "driver"), ("driver", "load")])
def test_the_second_break_moves_each_unsure_bridge_to_the_other_side(side, other):
    """The second break puts a bridge the rules could not place on the other side, whichever side they put it on."""
    # Reference: docs/splitting.md step 3 (our rules): the same node with that bridge on the other side; both are exact return
    # ratios of one circuit, so the same T gives the same closed-loop poles (Bode's return ratio).
    probed = break_loop(parse_text(TIE), "np")
    probed = replace(probed, bridges=(Bridge("cx1", side, "as close to both stages", False),))
    freq = np.logspace(1, 10, 181)
    first = Trial({}, probed, analyse(freq, _two_pole(freq)))
    asked = []
    check = second_break_check(first, lambda placement: asked.append(dict(placement)) or first)
    assert asked == [{"cx1": other}]
    assert check.name == "second-break" and check.passed is True
    assert check.detail.startswith(f"a second break, cx1 to the {other} side: the closed-loop poles below ")


def test_a_trials_failed_checks_include_the_opens_loop_check_when_it_was_asked():
    """Trial.failed: the analysis's failed self-checks, and the opens-loop check when it ran and failed (a split that
    leaves the loop closed supports no verdict); a trial without it has the analysis's alone (by construction)."""
    from types import SimpleNamespace

    from netloop.analysis.results import Check
    from netloop.jobs.measure_checks import Trial

    data = Check("nyquist-data", False, "the phase jumps", "sweep denser")
    fine = Check("falls-at-top", True, "T falls", "")
    closed = Check("opens-loop", False, "the loop stays closed on the load side", "move the bridge")
    analysis = SimpleNamespace(checks=(fine, data))
    assert Trial({}, None, analysis, opens=closed).failed == (data, closed)
    assert Trial({}, None, analysis).failed == (data,)
    assert Trial({}, None, SimpleNamespace(checks=(fine,)), opens=Check("opens-loop", True, "opens it", "")).failed == ()


@pytest.mark.parametrize(("top_hz", "at_top"), [(1e9, False), (5e6, True)])
def test_the_second_break_compares_poles_up_to_ten_times_the_crossover_or_the_top(top_hz, at_top):
    """The band where two breaks' poles are compared ends a decade above the highest gain crossover, or at the top of the
    sweep when that comes first (the data says nothing beyond it); a loop that never crosses 0 dB is compared up to the top."""
    from netloop.jobs.measure_checks import second_break_band  # noqa: PLC0415

    f = np.logspace(0, math.log10(top_hz), 401)
    a = analyse(f, _two_pole(f))
    (crossover,) = a.gain_crossovers  # about 786 kHz, the two-pole loop's (circuit theory): a decade above it is 7.9 MHz
    assert second_break_band(a) == (float(f[-1]) if at_top else 10.0 * crossover.freq_hz)
    flat = analyse(f, _two_pole(f, 0.5))
    assert not flat.gain_crossovers and second_break_band(flat) == float(f[-1])


def _doubted(detail: str = ""):
    """An analysis whose checks pass (``detail`` empty) or fail with ``detail``; P not read from the data."""
    from types import SimpleNamespace  # noqa: PLC0415

    from netloop.analysis.results import Check  # noqa: PLC0415

    checks = (Check("data", not detail, detail or "fine", ""),)
    return SimpleNamespace(checks=checks, nyquist=SimpleNamespace(open_loop_rhp_poles=0, open_loop_rhp_from="given"))


def test_the_split_tries_each_bridge_moved_the_unsure_first_and_passes_over_one_it_cannot_build():
    """With two bridges the rules placed, cc by a rule and cr by a default, the placements tried are cr moved alone (the
    unsure one first), then cc alone, then both; one the probe cannot build (None) is passed over for the next, and the
    first whose self-checks pass is kept, with the check "split" saying what moved and why."""
    from types import SimpleNamespace  # noqa: PLC0415

    from netloop.jobs.measure_checks import other_placements, settle_split  # noqa: PLC0415

    probed = SimpleNamespace(bridges=(Bridge("cc", "driver", "Miller capacitor of m6", True), Bridge("cr", "load", "a default", False)))
    assert other_placements(probed) == [{"cr": "driver"}, {"cc": "load"}, {"cc": "load", "cr": "driver"}]
    first = Trial({}, probed, _doubted("|T| rises at the top of the sweep"))
    asked = []

    def measure_coarse(placement, at=None):
        asked.append(placement)
        return None if len(asked) == 1 else Trial(placement, probed, _doubted())

    kept, check, trials = settle_split(first, measure_coarse)
    assert asked == [{"cr": "driver"}, {"cc": "load"}] and trials == [kept] and kept.placement == {"cc": "load"}
    assert check.passed and check.detail == ("cc to the load side: with the rules' split, |T| rises at the top of the sweep; "
                                             "with this one every self-check passes and T has no right-half-plane pole")


def test_a_pair_moves_the_kth_bridge_of_each_half_together_then_all():
    """At a pair the k-th bridge of each half moves together, whichever side the rules put it on, then every bridge at once."""
    from types import SimpleNamespace  # noqa: PLC0415

    from netloop.jobs.measure_checks import pair_placements  # noqa: PLC0415

    p = SimpleNamespace(bridges=(Bridge("ccp", "driver", "Miller", True), Bridge("rp", "load", "a default", False)))
    n = SimpleNamespace(bridges=(Bridge("ccn", "driver", "Miller", True), Bridge("rn", "load", "a default", False),
                                 Bridge("given", "load", "asked for", True, given=True)))
    assert pair_placements(p, n) == [({"ccp": "load"}, {"ccn": "load"}), ({"rp": "driver"}, {"rn": "driver"}),
                                     ({"ccp": "load", "rp": "driver"}, {"ccn": "load", "rn": "driver"})]
