"""Crossovers and margins from sampled data against python-control and closed forms."""

from __future__ import annotations

import math

import control
import numpy as np
import pytest
from analysis_loops import sample

from netloop.analysis import analyse

TWO_PI = 2.0 * math.pi
S = control.tf("s")


def reference(loop):
    """python-control 0.10 stability_margins on the transfer function (polynomial root solve, exact)."""
    gm, pm, sm, w_pc, w_gc, w_sm = control.stability_margins(loop, returnall=True)
    return gm, pm, sm, w_pc, w_gc, w_sm


def test_published_three_pole_example():
    """L = 25/(s^3+10s^2+10s+10): GM 3.6 at 3.1623 rad/s, PM 29.11 deg at 1.7844 rad/s, delay margin 0.2847 s."""
    loop = control.tf([25], [1, 10, 10, 10])
    a = analyse(*sample(loop, 1e-4, 1e3))
    m = a.margins
    # figures given with the task, verified with python-control 0.10 stability_margins
    gm, pm, _, w_pc, w_gc, _ = control.stability_margins(loop)
    assert gm == pytest.approx(3.6, rel=1e-9) and w_pc == pytest.approx(3.1623, abs=1e-4)
    assert pm == pytest.approx(29.11, abs=5e-3) and w_gc == pytest.approx(1.7844, abs=1e-4)
    assert m.gain_margin_db == pytest.approx(20 * math.log10(3.6), abs=1e-5)
    assert m.phase_crossover_hz * TWO_PI == pytest.approx(math.sqrt(10.0), rel=1e-7)  # closed form: w^2 = 10
    assert m.phase_margin_deg == pytest.approx(pm, abs=1e-4)
    assert m.unity_gain_hz * TWO_PI == pytest.approx(w_gc, rel=1e-7)
    assert m.delay_margin_s == pytest.approx(math.radians(pm) / w_gc, rel=1e-6)
    assert m.delay_margin_s == pytest.approx(0.2847, abs=1e-4)  # the task's figure (python-control agrees above)
    assert m.lower_gain_margin_db is None
    assert a.stable and a.nyquist.reliable and a.classification == "stable"


LOOPS = {
    # smooth loops of several shapes (our own), each with a single crossover
    "three-pole": control.tf([25], [1, 10, 10, 10]),
    "integrator-two-poles": 30 / (S * (S + 3) * (S + 20)),
    "opamp-like": 1e4 / ((S / 1e-2 + 1) * (S / 5 + 1) * (S / 40 + 1)),
    "lead-lag": 8 * (S / 2 + 1) / (S * (S / 0.5 + 1) * (S / 30 + 1)),
}


@pytest.mark.parametrize("name", sorted(LOOPS))
@pytest.mark.parametrize("offset", [0.0, 0.37, 0.81])
def test_phase_margin_within_1e3_deg_at_20_points_per_decade(name, offset):
    """At 20 points per decade the interpolated phase margin is within 1e-3 deg of the exact analytic one."""
    loop = LOOPS[name]
    _, pm, _, _, w_gc, _ = reference(loop)  # python-control: exact crossover by polynomial roots
    a = analyse(*sample(loop, 1e-4, 1e4, per_decade=20, offset=offset), fit_poles=False)
    assert len(a.gain_crossovers) == len(pm) == 1
    assert a.margins.phase_margin_deg == pytest.approx(pm[0], abs=1e-3)
    assert a.margins.unity_gain_hz * TWO_PI == pytest.approx(w_gc[0], rel=1e-5)


def test_linear_interpolation_would_not_meet_the_claim():
    """Interpolating linearly in log f misses the exact PM by more than 1e-3 deg, so the claim needs the spline."""
    loop = LOOPS["three-pole"]
    _, pm, _, _, _, _ = reference(loop)
    f, t = sample(loop, 1e-4, 1e4, per_decade=20, offset=0.37)
    g = 20 * np.log10(np.abs(t))
    i = int(np.flatnonzero(np.diff(np.sign(g)))[0])
    x = np.log10(f)
    xc = x[i] - g[i] * (x[i + 1] - x[i]) / (g[i + 1] - g[i])
    ph = np.degrees(np.unwrap(np.angle(t)))
    linear_pm = 180 + np.interp(xc, x, ph)
    assert abs(linear_pm - pm[0]) > 1e-3
    assert abs(analyse(f, t, fit_poles=False).margins.phase_margin_deg - pm[0]) < 1e-3


def test_conditionally_stable_loop_has_upper_and_lower_gain_margins():
    """K(s+1)^2/s^3 with two far poles: lower and upper gain margins equal python-control's phase crossovers."""
    loop = 50 * (S + 1) ** 2 / S**3 / (S / 100 + 1) ** 2
    gm, pm, _, w_pc, w_gc, _ = reference(loop)
    a = analyse(*sample(loop, 1e-3, 1e5))
    assert a.stable and a.nyquist.reliable
    m = a.margins
    # python-control 0.10: two phase crossovers; GM < 1 is the lower margin, GM > 1 the upper
    lower = [(g, w) for g, w in zip(gm, w_pc) if g < 1]
    upper = [(g, w) for g, w in zip(gm, w_pc) if g > 1]
    assert m.lower_gain_margin_db == pytest.approx(-20 * math.log10(lower[0][0]), abs=1e-4)
    assert m.lower_phase_crossover_hz * TWO_PI == pytest.approx(lower[0][1], rel=1e-6)
    assert m.gain_margin_db == pytest.approx(20 * math.log10(upper[0][0]), abs=1e-4)
    assert m.phase_crossover_hz * TWO_PI == pytest.approx(upper[0][1], rel=1e-6)
    assert m.phase_margin_deg == pytest.approx(pm[0], abs=1e-3)
    assert [c.kind for c in a.phase_crossovers] == ["lower", "upper"]


@pytest.mark.parametrize("k", [5.0, 0.3])
def test_lower_gain_margin_closed_form(k):
    """K(s+1)^2/s^3: phase is -180 at w = 1 where |L| = 2K, so the lower margin is 20 log10(2K) when 2K > 1."""
    # closed form (our derivation): angle = -270 + 2 atan(w) = -180 at w = 1; |L(j1)| = 2K.
    # Routh on s^3 + K s^2 + 2K s + K: stable iff 2K^2 > K, i.e. 2K > 1.
    loop = k * (S + 1) ** 2 / S**3
    a = analyse(*sample(loop, 1e-4, 1e4 * k), fit_poles=False)
    assert a.nyquist.reliable
    pc = a.phase_crossovers[0]
    assert pc.freq_hz * TWO_PI == pytest.approx(1.0, rel=1e-7)
    assert pc.gain_db == pytest.approx(20 * math.log10(2 * k), abs=1e-6)
    if 2 * k > 1:
        assert a.stable and a.margins.lower_gain_margin_db == pytest.approx(20 * math.log10(2 * k), abs=1e-6)
    else:
        assert not a.stable and a.nyquist.closed_loop_rhp_poles == 2 and a.margins.lower_gain_margin_db is None


def test_unstable_loop_negative_margins_and_two_rhp_poles():
    """Five times the three-pole loop is unstable: negative PM and GM as python-control reports, Z = 2 as numpy.roots."""
    loop = 5 * control.tf([25], [1, 10, 10, 10])
    gm, pm, _, _, _, _ = control.stability_margins(loop)  # python-control 0.10
    a = analyse(*sample(loop, 1e-4, 1e3))
    assert a.margins.phase_margin_deg == pytest.approx(pm, abs=1e-3) and pm < 0
    assert a.margins.gain_margin_db == pytest.approx(20 * math.log10(gm), abs=1e-5) and gm < 1
    rhp = int(np.sum(np.roots([1, 10, 10, 10 + 125]).real > 0))  # numpy.roots of den + num
    assert rhp == 2
    assert a.nyquist.closed_loop_rhp_poles == rhp and a.nyquist.reliable and not a.stable
    assert a.poles.rhp_count == rhp and a.poles.agrees_with_nyquist
    assert a.margins.delay_margin_s is None
    assert a.classification == "unstable"


def test_modulus_margin_matches_python_control():
    """min |1 + T| and its frequency match python-control's stability margin on the same loop."""
    loop = control.tf([25], [1, 10, 10, 10])
    _, _, sm, _, _, w_sm = control.stability_margins(loop)  # python-control 0.10
    a = analyse(*sample(loop, 1e-4, 1e3), fit_poles=False)
    assert a.margins.modulus_margin == pytest.approx(sm, rel=1e-7)
    assert a.margins.modulus_freq_hz * TWO_PI == pytest.approx(w_sm, rel=1e-4)


def test_margins_agree_with_python_control_on_the_same_frequency_data():
    """python-control's stability_margins on an FRD of the same samples finds the same crossovers (to its own interpolation)."""
    loop = 30 / (S * (S + 3) * (S + 20))
    f, t = sample(loop, 1e-3, 1e4, per_decade=40)
    frd = control.frd(t, TWO_PI * f)
    gm, pm, _, w_pc, w_gc, _ = control.stability_margins(frd)  # python-control 0.10 on FRD data
    m = analyse(f, t, fit_poles=False).margins
    assert m.phase_margin_deg == pytest.approx(pm, abs=0.05)
    assert m.unity_gain_hz * TWO_PI == pytest.approx(w_gc, rel=1e-3)
    assert m.gain_margin_db == pytest.approx(20 * math.log10(gm), abs=0.01)
    assert m.phase_crossover_hz * TWO_PI == pytest.approx(w_pc, rel=1e-3)


def test_delay_margin_is_the_delay_that_destabilises():
    """Adding the reported delay margin as e^{-s tau} puts the phase margin at zero (exact delay, not Pade)."""
    loop = 30 / (S * (S + 3) * (S + 20))
    f, t = sample(loop, 1e-3, 1e4)
    tau = analyse(f, t, fit_poles=False).margins.delay_margin_s
    delayed = analyse(f, t * np.exp(-2j * np.pi * f * tau), fit_poles=False)
    assert delayed.margins.phase_margin_deg == pytest.approx(0.0, abs=1e-4)
    slightly_more = analyse(f, t * np.exp(-2j * np.pi * f * tau * 1.01), fit_poles=False)
    assert slightly_more.margins.phase_margin_deg < 0


def test_peaking_at_crossover_is_exact():
    """At each gain crossover |T/(1+T)| evaluated on the analytic loop equals the reported 1/(2 sin(PM/2))."""
    loop = control.tf([25], [1, 10, 10, 10])
    a = analyse(*sample(loop, 1e-4, 1e3), fit_poles=False)
    c = a.gain_crossovers[0]
    t_c = complex(loop(2j * np.pi * c.freq_hz))
    assert abs(t_c) == pytest.approx(1.0, abs=1e-7)
    assert c.peaking_exact == pytest.approx(abs(t_c / (1 + t_c)), rel=1e-6)
    assert c.peaking_db == pytest.approx(20 * math.log10(c.peaking_exact))
    assert c.peaking_small_angle == pytest.approx(1 / math.radians(c.phase_margin_deg))


def test_closed_loop_peak_is_the_true_maximum():
    """The reported peak of |T/(1+T)| equals a brute-force maximum of the analytic closed loop on a fine grid."""
    loop = control.tf([25], [1, 10, 10, 10])
    a = analyse(*sample(loop, 1e-4, 1e3), fit_poles=False)
    w = np.linspace(0.5, 4.0, 200001)  # brute force on the analytic T (our independent oracle)
    cl = np.abs(control.feedback(loop, 1)(1j * w))
    low = abs(complex(control.feedback(loop, 1)(2j * np.pi * 1e-4)))
    assert a.peaking.absolute_peak_db == pytest.approx(20 * math.log10(cl.max()), abs=1e-6)
    assert a.peaking.peak_freq_hz * TWO_PI == pytest.approx(w[np.argmax(cl)], rel=1e-4)
    assert a.peaking.peak_db == pytest.approx(20 * math.log10(cl.max() / low), abs=1e-6)


def test_resonance_that_lifts_the_gain_above_unity_again():
    """A stable loop whose resonance crosses 0 dB twice more: every PM equals python-control's, none bogus-negative."""
    w0 = 10.0  # our own shape: integrator times a resonant peak (zeta 0.6 over 0.02) near w0, and a far pole
    loop = 1 / S * (S**2 / w0**2 + 2 * 0.6 * S / w0 + 1) / (S**2 / w0**2 + 2 * 0.02 * S / w0 + 1) / (1 + S / 1e3)
    _, pm, _, _, w_gc, _ = reference(loop)  # python-control 0.10: three crossovers, all PM > 0
    a = analyse(*sample(loop, 1e-4, 1e6, per_decade=80))
    assert [c.direction for c in a.gain_crossovers] == ["down", "up", "down"]
    # a Q = 25 resonance is no smooth loop: 80 points per decade place these within 0.05 deg
    assert [c.phase_margin_deg for c in a.gain_crossovers] == pytest.approx(list(pm), abs=0.05)
    assert [c.freq_hz * TWO_PI for c in a.gain_crossovers] == pytest.approx(list(w_gc), rel=5e-4)
    assert a.margins.phase_margin_deg == pytest.approx(min(pm), abs=0.05)
    # numpy.roots of the characteristic polynomial den + num: no RHP root
    num, den = loop.num[0][0], loop.den[0][0]
    assert int(np.sum(np.roots(np.polyadd(den, num)).real > 0)) == 0
    assert a.stable and a.nyquist.reliable and a.poles.rhp_count == 0


def test_lower_gain_margin_is_the_nearest_of_several_lower_crossovers():
    """A triple pole at 10 Hz, a double zero at 1 kHz, poles at 1 and 10 MHz: of its two lower phase crossovers the lower
    gain margin is the one nearest 0 dB, as python-control's phase crossovers give it."""
    w = TWO_PI
    loop = 1e8 * (1 + S / (w * 1e3)) ** 2 / ((1 + S / (w * 10)) ** 3 * (1 + S / (w * 1e6)) * (1 + S / (w * 1e7)))
    gm, _, _, w_pc, _, _ = reference(loop)
    lower = sorted((-20 * math.log10(g), wc) for g, wc in zip(gm, w_pc) if g < 1)  # python-control 0.10: GM < 1
    assert len(lower) == 2 and lower[1][0] - lower[0][0] > 90.0  # 46.5 dB at 971 Hz and 141.4 dB at 17.8 Hz
    a = analyse(*sample(loop, 1.0, 1e9), fit_poles=False)
    assert a.stable and a.nyquist.reliable and [c.kind for c in a.phase_crossovers] == ["lower", "lower", "upper"]
    assert a.margins.lower_gain_margin_db == pytest.approx(lower[0][0], abs=1e-4)
    assert a.margins.lower_phase_crossover_hz * TWO_PI == pytest.approx(lower[0][1], rel=1e-6)


def test_a_crossover_root_is_brentqs_with_two_evaluations_fewer():
    """_root gives the ends' values it already read to brentq instead of evaluating the spline there again: the same root
    bit for bit as scipy's brentq on the same function, two evaluations fewer (reference: scipy.optimize.brentq)."""
    from scipy.optimize import brentq

    from netloop.analysis.crossovers import _XTOL, _root
    from netloop.analysis.response import Response

    f = np.logspace(0, 9, 91)
    resp = Response.from_data(f, 1e4 / ((1 + 1j * f / 1e3) * (1 + 1j * f / 3e6) * (1 + 1j * f / 1e8)))
    i = int(np.flatnonzero(np.diff(np.sign(resp.gain_db)))[0])
    calls = {"ours": 0, "scipy": 0}

    def gain(who):
        def fun(u):
            calls[who] += 1
            return float(resp.gain_at(u))
        return fun

    ours = _root(gain("ours"), resp.x[i], resp.x[i + 1])
    theirs = brentq(gain("scipy"), resp.x[i], resp.x[i + 1], xtol=_XTOL)
    assert ours == theirs
    assert calls["ours"] == calls["scipy"]  # _root's own two evaluations of the ends stand for brentq's
