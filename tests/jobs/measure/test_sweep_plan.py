"""The sweep plan of sample_loops (widening, refinement rounds, status lines), on the analytic fake simulator."""

from __future__ import annotations

import logging
import math

import numpy as np
import pytest
from scipy.optimize import brentq

import netloop.jobs.measure as measure_module
from netloop.analysis import analyse
from netloop.analysis.refine import crossings
from netloop.jobs.measure import Sweep, inputs_only_doubt, sample_loops
from netloop.sim.analytic import AnalyticSimulator
from netloop.sim.job import AcRun, AcSweep, SimJob

W = 2 * np.pi


def _sample(loop, sweep: Sweep):
    """sample_loops on the analytic simulator answering T = loop(f): (analysis, SimInfo, warnings, the simulator)."""
    sim = AnalyticSimulator({"v(x)": lambda f, ac: loop(np.asarray(f)) * ac.get("v1", 0.0)})

    def job_for(sweeps):
        return SimJob(netlist="* analytic\n", runs=(AcRun("run", {"v1": 1.0}, sweeps),), save=("v(x)",), excitable=("v1",))

    analyses, info, warnings = sample_loops(job_for, lambda r: {"loop": r.runs[0].vectors["v(x)"]}, sim, sweep, {"loop": 0})
    return analyses["loop"], info, warnings["loop"], sim


def _two_pole(gain: float):
    """gain / ((1 + s/w1)(1 + s/w2)), poles at 1 kHz and 1 MHz (invented)."""
    def t(f):
        s = 1j * W * np.asarray(f, dtype=float)
        return gain / ((1 + s / (W * 1e3)) * (1 + s / (W * 1e6)))

    return t


ALPHA = 0.3  # |T| rises by 10**0.3 = 2.0 per decade toward DC: more than the 10 % that marks a rise, with a phase that never moves


@pytest.mark.parametrize("fc_hz", [30.0, 3e-6])
def test_a_crossover_hidden_below_the_first_sweep_is_found_by_widening_down_to_the_floor(fc_hz):
    """Bode's ideal loop T = (j f / fc)^-0.3 sampled from 1 kHz up has |T| < 1 rising toward DC at the bottom with a flat
    phase: the sweep is widened downward, as far as the floor (1e-6 Hz) when it must, until the crossover is in the data."""
    # Reference: H. W. Bode, "Network Analysis and Feedback Amplifier Design" (1945), the ideal (fractional-slope) loop:
    # |T| = 1 exactly at fc and the phase is -90 * alpha deg at every frequency, so the phase margin is 180 - 90 * alpha.
    a, _, _, _ = _sample(lambda f: (1j * f / fc_hz) ** -ALPHA, Sweep(fmin_hz=1e3, fmax_hz=1e6, fmax_given=True))
    assert a.freq_hz[0] < fc_hz and a.freq_hz[0] >= Sweep().floor_hz
    assert a.margins.unity_gain_hz == pytest.approx(fc_hz, rel=1e-9)
    assert a.margins.phase_margin_deg == pytest.approx(180.0 - 90.0 * ALPHA, abs=1e-9)


def test_the_sweep_is_widened_by_two_decades_a_step_and_only_where_a_crossing_may_hide():
    """Bode's ideal loop (as above) crossing 0 dB at 1e7 Hz, swept from 1 kHz to 1 MHz with neither limit given: |T| is
    above 0.1 at the top, so the top moves up two decades a step until it is not: 1e8 Hz (|T| = 10**-0.3 = 0.50), 1e10
    (0.13), 1e12 (0.063); at the bottom |T| is about 16, above 1 and rising toward DC, so no crossing hides below and the bottom stays. With the
    crossover at 3.86 kHz, |T| = 1.5 at the bottom: still above 1, still not widened."""
    a, _, _, _ = _sample(lambda f: (1j * f / 1e7) ** -ALPHA, Sweep(fmin_hz=1e3, fmax_hz=1e6))
    assert a.freq_hz[0] == 1e3 and a.freq_hz[-1] == pytest.approx(1e12, rel=1e-12) and abs(a.t[-1]) < 0.1
    assert a.margins.unity_gain_hz == pytest.approx(1e7, rel=1e-9)
    fc = 1e3 * 1.5 ** (1 / ALPHA)
    a, _, _, _ = _sample(lambda f: (1j * f / fc) ** -ALPHA, Sweep(fmin_hz=1e3, fmax_hz=1e6, fmax_given=True))
    assert abs(a.t[0]) == pytest.approx(1.5, rel=1e-12) and a.freq_hz[0] == 1e3
    assert a.margins.unity_gain_hz == pytest.approx(fc, rel=1e-9)


def test_widening_limits_must_bound_the_widening():
    """A floor at or below 0 Hz, or an infinite ceiling, is refused: the widening would never end."""
    # Reference: common practice (a loop that multiplies a limit by 100 each round ends only on a finite bound above 0)
    for bad in (dict(floor_hz=0.0), dict(ceiling_hz=math.inf)):
        with pytest.raises(Exception, match="the sweep is widened between a floor above 0 and a finite ceiling"):
            Sweep(**bad)


A0 = 1000.0


def _crossover_hz() -> float:
    t = _two_pole(A0)
    # circuit theory: |T(fc)| = 1 on the closed form, solved numerically (scipy brentq)
    return brentq(lambda f: abs(t(f)) - 1.0, 1e3, 1e8, xtol=1e-9, rtol=1e-15)


@pytest.mark.parametrize("proposed", ["none", "one"])
def test_each_refinement_round_is_one_job_counted_and_announced(monkeypatch, caplog, proposed):
    """When the first round proposes no frequency, no job is sent and the loop is settled; when it proposes one, that
    frequency alone is run as a one-point linear sweep; every round is one job, counted in refinement_rounds and announced
    in the status log by its number."""
    # Reference: ngspice manual, .ac: "ac lin np fstart fstop" with np = 1 and fstart = fstop visits that one frequency;
    # the crossover of the two-pole closed form (circuit theory, brentq above). The proposals are the stage's input,
    # replaced here (netloop.analysis.refine.propose_around) to reach both edges of a round.
    fc = _crossover_hz()
    monkeypatch.setattr(measure_module, "propose_around", lambda found, **kw: np.array([fc]) if proposed == "one" else np.empty(0))
    caplog.set_level(logging.INFO, logger="netloop")
    a, info, warnings, sim = _sample(_two_pole(A0), Sweep(fmin_hz=1.0, fmax_hz=1e9, fmin_given=True, fmax_given=True))
    assert info.refinement_rounds == len(sim.jobs) - 1 and info.refined and warnings == ()
    if proposed == "none":
        assert len(sim.jobs) == 1
    else:
        assert sim.jobs[1].runs[0].sweeps == (AcSweep("lin", 1, fc, fc),) and fc in a.freq_hz
        assert a.margins.unity_gain_hz == pytest.approx(fc, rel=1e-9)
    said = [r.getMessage() for r in caplog.records if r.name == "netloop"]
    rounds = [f"simulating refinement round {k}: 1 AC run(s)" for k in range(1, info.refinement_rounds + 1)]
    assert said == ["simulating the first sweep: 1 AC run(s)", *rounds, "simulations done"]


def test_a_resonance_that_crosses_0_db_between_samples_gets_its_crossovers_refined():
    """A resonance whose peak (+14 dB) lies between two samples that are both below 0 dB shows no crossover at first; the
    rounds that sample it densely find its crossovers and refine them to the phase margin python-control gives."""
    control = pytest.importorskip("control")
    k, zeta, f0 = 0.02, 0.002, 1.234e6
    wn = W * f0

    def loop(f):
        s = 1j * W * np.asarray(f)
        return k * wn**2 / (s**2 + 2 * zeta * wn * s + wn**2)

    f = np.logspace(0, 9, 91)
    assert not crossings(f, loop(f)).gain_crossovers  # the case is what it claims: no crossover in the first sweep
    a, info, _, _ = _sample(loop, Sweep(fmin_hz=1.0, fmax_hz=1e9, fmin_given=True, fmax_given=True))
    s = control.tf("s")
    # python-control 0.10 stability_margins on the same closed form
    _, pm, _, _, _, _ = control.stability_margins(k * wn**2 / (s**2 + 2 * zeta * wn * s + wn**2))
    assert a.gain_crossovers and a.margins.phase_margin_deg == pytest.approx(pm, abs=1e-3)
    # circuit theory: the closed loop's characteristic s^2 + 2 zeta wn s + wn^2 (1 + k) has its roots in the LHP (numpy.roots)
    assert a.stable and np.all(np.roots([1.0, 2 * zeta * wn, wn**2 * (1 + k)]).real < 0)
    assert info.refinement_rounds >= 2


@pytest.mark.parametrize(("gain", "why"), [
    (A0, ""),
    (0.5, f"T never reaches 0 dB (at most {20 * math.log10(0.5):.4g} dB)"),
    (-A0, "T is negative at low frequency (positive feedback)"),
])
def test_a_driver_naming_only_inputs_stands_only_with_negative_feedback_that_regulates(gain, why):
    """The reason a T measured with driver= naming only inputs does not stand is empty for a regulating loop with negative
    feedback and says, word for word, that T never reaches 0 dB or that it is negative at low frequency otherwise."""
    # Reference: circuit theory on the closed form gain / ((1 + s/w1)(1 + s/w2)): |T| peaks at |gain| at DC (20 log10 0.5 =
    # -6.021 dB); a negative gain is positive feedback at DC (common practice: a backwards split measures -T)
    f = np.logspace(0, 9, 91)
    a = analyse(f, _two_pole(gain)(f))
    assert all(c.passed for c in a.checks)
    assert inputs_only_doubt(a, ()) == why


def test_a_simulator_whose_results_name_no_backend_is_named_by_its_own():
    """SimInfo.backend is what the results name, else the simulator's own backend attribute, else its class name: a
    simulator written outside netloop (the Simulator protocol asks only for run) is still named in the record."""
    from dataclasses import replace

    class Quiet:  # answers as the analytic simulator does, without naming a backend in its results
        def __init__(self, named: bool):
            self.inner = AnalyticSimulator({"v(x)": lambda f, ac: _two_pole(A0)(np.asarray(f)) * ac.get("v1", 0.0)})
            if named:
                self.backend = "bench-rig"

        def run(self, job):
            return replace(self.inner.run(job), backend="")

    def job_for(sweeps):
        return SimJob(netlist="* analytic\n", runs=(AcRun("run", {"v1": 1.0}, sweeps),), save=("v(x)",), excitable=("v1",))

    for named, expected in ((True, "bench-rig"), (False, "Quiet")):
        _, info, _ = sample_loops(job_for, lambda r: {"loop": r.runs[0].vectors["v(x)"]}, Quiet(named), Sweep(), {"loop": 0})
        assert info.backend == expected
