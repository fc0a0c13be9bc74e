"""Where the Nyquist count asks for denser samples ("sample more densely there"), the sweep adds them by itself."""

from __future__ import annotations

import numpy as np
import pytest

from netloop.analysis import analyse
from netloop.jobs.measure import Sweep, sample_loops
from netloop.sim.analytic import AnalyticSimulator
from netloop.sim.job import AcRun, SimJob

W = 2 * np.pi
F0, ZETA = 1.234e6, 0.002  # a pole pair with Q = 250 between two samples of a 10-point-per-decade sweep


def resonant(f):
    """0.5 / (1 + s/1 kHz) times a pole pair at 1.234 MHz with damping 0.002: |T| peaks near -20 dB, never 0 dB."""
    s = 1j * W * np.asarray(f)
    wn = W * F0
    return 0.5 / (1 + s / (W * 1e3)) * wn**2 / (s**2 + 2 * ZETA * wn * s + wn**2)


def _sample(sweep: Sweep):
    sim = AnalyticSimulator({"v(x)": lambda f, ac: resonant(f) * ac.get("v1", 0.0)})

    def job_for(sweeps):
        return SimJob(netlist="* analytic\n", runs=(AcRun("run", {"v1": 1.0}, sweeps),), save=("v(x)",), excitable=("v1",))

    analyses, info, _ = sample_loops(job_for, lambda r: {"loop": r.runs[0].vectors["v(x)"]}, sim, sweep, {"loop": 0})
    return analyses["loop"], info


def test_a_resonance_between_samples_is_sampled_densely_until_the_count_is_reliable():
    """A sharp resonance that a 10-point-per-decade sweep steps over makes the count doubtful on those samples alone;
    the measurement adds samples there by itself until T's phase moves less than 60 deg between samples, and the count
    is then reliable and stable, as the closed loop's roots say (numpy.roots of the characteristic polynomial)."""
    sweep = Sweep(fmin_hz=1.0, fmax_hz=1e9, fmin_given=True, fmax_given=True)
    f = np.logspace(0, 9, 91)
    coarse = analyse(f, resonant(f), fit_poles=False)
    assert not coarse.nyquist.reliable and "sample more densely" in " ".join(coarse.nyquist.reasons)
    assert coarse.nyquist.coarse_hz and all(lo < F0 * 1.2 and hi > F0 * 0.8 for lo, hi in coarse.nyquist.coarse_hz)
    a, info = _sample(sweep)
    assert a.nyquist.reliable and a.nyquist.coarse_hz == () and a.stable, a.nyquist.reasons
    assert info.refinement_rounds >= 1 and info.refined
    near = (a.freq_hz > F0 * 0.9) & (a.freq_hz < F0 * 1.1)
    assert near.sum() > 5  # the samples were added at the resonance
    # reference: closed-loop characteristic (1 + s/w1)(s^2 + 2 zeta wn s + wn^2) + 0.5 wn^2 has no root in the RHP
    wn, w1 = W * F0, W * 1e3
    char = np.polyadd(np.polymul([1 / w1, 1], [1, 2 * ZETA * wn, wn**2]), [0.5 * wn**2])
    assert np.all(np.roots(char).real < 0)


def test_the_measured_analysis_is_the_whole_analysis_of_the_final_samples():
    """After refinement rounds, the analysis sample_loops returns (its last draft, finished) is analyse()'s whole analysis of
    the samples it ends with, field for field and bit for bit, not one of an earlier round's samples; stable, as the closed
    loop's roots say (numpy.roots, as above)."""
    a, info = _sample(Sweep(fmin_hz=1.0, fmax_hz=1e9, fmin_given=True, fmax_given=True))
    assert info.refinement_rounds >= 1 and a.poles is not None
    whole = analyse(a.freq_hz, a.t, open_loop_rhp_poles=0)  # the P sample_loops was given
    assert repr(a) == repr(whole) and a == whole  # floats in repr are exact
    assert a.freq_hz.tobytes() == whole.freq_hz.tobytes() and a.t.tobytes() == whole.t.tobytes()
    assert a.stable and a.freq_hz.size > 91  # the rounds added samples to the first sweep's 91


def test_a_loop_that_crosses_0_db_and_resonates_far_above_gets_both_refined():
    """A loop that crosses 0 dB near 20 kHz and resonates at 1.234 MHz (peak just below 0 dB): the first round reads only
    the crossovers (crossings), the count's coarse interval at the resonance is refined in the rounds after, and the
    measurement ends with a reliable count, samples at the resonance and the phase margin python-control gives
    (control.stability_margins, python-control 0.10), stable as the closed loop's roots say (numpy.roots)."""
    import control

    k, zeta = 20.0, 0.01
    wn, w1 = W * F0, W * 1e3

    def loop(f):
        s = 1j * W * np.asarray(f)
        return k / (1 + s / w1) * wn**2 / (s**2 + 2 * zeta * wn * s + wn**2)

    f = np.logspace(0, 9, 91)
    first = analyse(f, loop(f), fit_poles=False)
    assert first.gain_crossovers and any(lo < F0 < hi for lo, hi in first.nyquist.coarse_hz)  # the case is what it claims
    sim = AnalyticSimulator({"v(x)": lambda fr, ac: loop(fr) * ac.get("v1", 0.0)})

    def job_for(sweeps):
        return SimJob(netlist="* analytic\n", runs=(AcRun("run", {"v1": 1.0}, sweeps),), save=("v(x)",), excitable=("v1",))

    sweep = Sweep(fmin_hz=1.0, fmax_hz=1e9, fmin_given=True, fmax_given=True)
    analyses, info, _ = sample_loops(job_for, lambda r: {"loop": r.runs[0].vectors["v(x)"]}, sim, sweep, {"loop": 0})
    a = analyses["loop"]
    assert a.nyquist.reliable and a.nyquist.coarse_hz == () and info.refined and info.refinement_rounds >= 2
    assert np.count_nonzero((a.freq_hz > F0 * 0.9) & (a.freq_hz < F0 * 1.1)) > 5
    s = control.tf("s")
    _, pm, _, _, _, _ = control.stability_margins(k / (1 + s / w1) * wn**2 / (s**2 + 2 * zeta * wn * s + wn**2))
    assert a.margins.phase_margin_deg == pytest.approx(pm, abs=1e-4)
    char = np.polyadd(np.polymul([1 / w1, 1], [1, 2 * zeta * wn, wn**2]), [k * wn**2])
    assert a.stable == bool(np.all(np.roots(char).real < 0)) and a.stable
