"""Second-order equivalents of the phase margin, and the closed-loop pole fit, against textbook relations."""

from __future__ import annotations

import math

import control
import numpy as np
import pytest
from analysis_loops import sample

from netloop.analysis import analyse
from netloop.analysis.second_order import damping_from_phase_margin, phase_margin_from_damping, second_order_estimate

S = control.tf("s")


def second_order_loop(zeta: float, wn: float = 10.0):
    """T = wn^2 / (s (s + 2 zeta wn)), whose closed loop is wn^2 / (s^2 + 2 zeta wn s + wn^2)."""
    return wn**2 / (S * (S + 2 * zeta * wn))


@pytest.mark.parametrize("zeta", [0.05, 0.2, 0.45, 0.7, 1.0, 2.5])
def test_closed_form_matches_python_control(zeta):
    """PM = atan(2 zeta / sqrt(sqrt(1 + 4 zeta^4) - 2 zeta^2)) equals python-control's PM of the second-order loop."""
    _, pm, _, _, _, _ = control.stability_margins(second_order_loop(zeta))  # python-control 0.10
    assert phase_margin_from_damping(zeta) == pytest.approx(pm, abs=1e-9)
    # the textbook form, with its cancellation, agrees where it is still accurate
    textbook = math.degrees(math.atan(2 * zeta / math.sqrt(math.sqrt(1 + 4 * zeta**4) - 2 * zeta**2)))
    assert phase_margin_from_damping(zeta) == pytest.approx(textbook, abs=1e-9)
    assert damping_from_phase_margin(pm) == pytest.approx(zeta, rel=1e-9)


# PM (deg) against damping ratio for the second-order loop, as tabulated/plotted in textbooks
# (e.g. Franklin, Powell, Emami-Naeini, "Feedback Control of Dynamic Systems", the PM-vs-zeta figure);
# values from memory, to 0.1 deg.
TABLE = [(0.1, 11.4), (0.2, 22.6), (0.3, 33.3), (0.4, 43.1), (0.5, 51.8), (0.6, 59.2), (0.7, 65.2), (0.8, 69.9), (0.9, 73.5), (1.0, 76.3)]


@pytest.mark.parametrize("zeta,pm", TABLE)
def test_textbook_table(zeta, pm):
    """The exact relation reproduces the textbook PM-vs-damping values (from memory) to 0.1 deg."""
    assert phase_margin_from_damping(zeta) == pytest.approx(pm, abs=0.1)


def test_hundred_zeta_rule_of_thumb():
    """PM ~ 100 zeta holds within 4 deg for zeta up to 0.6 (common practice)."""
    for zeta in np.linspace(0.05, 0.6, 12):
        assert abs(phase_margin_from_damping(zeta) - 100 * zeta) < 4.0


@pytest.mark.parametrize("zeta", [0.15, 0.35, 0.6])
def test_estimates_from_sampled_second_order_loop(zeta):
    """From sampled data: damping, overshoot (python-control step_info), resonant peak and AAA poles of the exact second-order loop."""
    wn = 10.0
    loop = second_order_loop(zeta, wn)
    a = analyse(*sample(loop, 1e-3, 1e4))
    est = a.second_order
    assert est.damping_ratio == pytest.approx(zeta, rel=1e-5)
    assert est.q == pytest.approx(1 / (2 * zeta), rel=1e-5)
    closed = control.feedback(loop, 1)
    info = control.step_info(closed, T=np.linspace(0, 8, 80001))  # python-control 0.10
    assert est.overshoot_pct == pytest.approx(info["Overshoot"], abs=1e-2)
    # this loop's closed loop IS second order, so the estimate of the peak equals the measured peak
    assert est.resonant_peak_db == pytest.approx(a.peaking.absolute_peak_db, abs=1e-6)
    # closed-loop poles: numpy.roots of s^2 + 2 zeta wn s + wn^2
    expected = sorted(np.roots([1, 2 * zeta * wn, wn**2]), key=lambda p: p.imag)
    found = sorted(a.poles.poles_rad_s, key=lambda p: p.imag)
    np.testing.assert_allclose(found, expected, rtol=1e-6)
    assert a.poles.dominant_damping == pytest.approx(zeta, rel=1e-6)
    assert a.poles.dominant_freq_hz * 2 * math.pi == pytest.approx(wn, rel=1e-6)


def test_no_estimate_outside_the_second_order_range():
    """A phase margin of 0 or below, 90 or above, or none gives no second-order estimate (None)."""
    assert second_order_estimate(None) is None
    assert second_order_estimate(-5.0) is None
    assert second_order_estimate(95.0) is None
    assert second_order_estimate(45.0) is not None


def test_overdamped_estimate_has_no_overshoot_or_peak():
    """zeta >= 1 (PM > 76.3 deg) has zero step overshoot and no resonant peak, per the textbook relations."""
    est = second_order_estimate(phase_margin_from_damping(1.5))
    assert est.damping_ratio == pytest.approx(1.5)
    assert est.overshoot_pct == 0.0 and est.resonant_peak_db is None


def test_overdamped_and_unpeaked_estimates():
    """Above PM = 76.35 deg (zeta = 1, closed form: atan(2 sqrt(sqrt(5) + 2))) the second-order loop is overdamped: no
    overshoot; between 65.5 deg (zeta = 1/sqrt(2)) and there it overshoots but has no resonant peak (textbook relations in
    the module docstring); PM outside (0, 90) has no second-order equivalent."""
    zeta_one = math.degrees(math.atan(2 * math.sqrt(math.sqrt(5) + 2)))  # PM of zeta = 1, closed form
    over = second_order_estimate(zeta_one + 3.0)
    assert over.damping_ratio > 1.0 and over.overshoot_pct == 0.0 and over.resonant_peak_db is None
    zeta = 0.8  # between 1/sqrt(2) and 1
    mid = second_order_estimate(phase_margin_from_damping(zeta))
    assert mid.overshoot_pct == pytest.approx(100 * math.exp(-math.pi * zeta / math.sqrt(1 - zeta**2)), rel=1e-9)
    assert mid.resonant_peak_db is None
    assert second_order_estimate(None) is None and second_order_estimate(90.0) is None and second_order_estimate(0.0) is None
    with pytest.raises(ValueError, match=r"^a second-order loop has a phase margin in \(0, 90\) deg, not 95"):
        damping_from_phase_margin(95.0)


@pytest.mark.parametrize("pm", [0.5, *np.linspace(1.0, 89.5, 178)])
def test_damping_inverts_the_phase_margin_to_full_precision(pm):
    """damping_from_phase_margin inverts the closed form to 1e-13 relative over all of (0, 90) deg, small margins below
    1 deg included (the module docstring's PM(zeta), read back)."""
    assert phase_margin_from_damping(damping_from_phase_margin(pm)) == pytest.approx(pm, rel=1e-13)


@pytest.mark.parametrize("pm", [1e-300, 1e-200, 1e-12, 1.1e-10, 1.2e-10, 1e-8, 0.999e-6, 1e-6, 1.001e-6, 1e-4])
def test_a_margin_a_hair_above_zero_has_its_damping(pm):
    """A phase margin just above 0 deg (a loop on the edge) gets its damping ratio and estimate, not a failed root search:
    PM(zeta) read back to 1e-13 relative (module docstring's closed form), on both sides of the small-angle switch."""
    zeta = damping_from_phase_margin(pm)
    assert phase_margin_from_damping(zeta) == pytest.approx(pm, rel=1e-13)
    estimate = second_order_estimate(pm)
    assert estimate.damping_ratio == zeta and estimate.q == pytest.approx(1 / (2 * zeta), rel=1e-15)


def test_an_underflowing_margin_gives_an_infinite_q():
    """The smallest positive phase margin (a denormal) has damping 0 in double precision: Q is infinite, not a
    division by zero (Q = 1 / (2 zeta), module docstring)."""
    estimate = second_order_estimate(5e-324)
    assert estimate.damping_ratio == 0.0 and estimate.q == math.inf and estimate.resonant_peak_db is None


@pytest.mark.parametrize("pm", [0.0, -1e-300, 90.0, 90.5, 180.0])
def test_no_damping_for_a_margin_outside_zero_to_ninety(pm):
    """A phase margin of 0 deg or less, or 90 deg or more, has no second-order loop (PM(zeta) covers exactly (0, 90) deg,
    module docstring), and the error says so."""
    with pytest.raises(ValueError, match=r"^a second-order loop has a phase margin in \(0, 90\) deg, not "):
        damping_from_phase_margin(pm)


@pytest.mark.parametrize("zeta", [0.05, 0.3, 0.5, 0.7, 1 / math.sqrt(2), 0.71, 0.8, 0.9, 1.0, 1.3, 2.0])
def test_resonant_peak_against_python_control(zeta):
    """The resonant peak of wn^2/(s^2 + 2 zeta wn s + wn^2) equals the largest |H(jw)| in dB on python-control's frequency
    response (0 dB, at DC, for zeta >= 1/sqrt(2): no peak)."""
    from netloop.analysis.second_order import resonant_peak_db

    h = control.tf([1.0], [1.0, 2 * zeta, 1.0])
    w = np.concatenate([[0.0], np.linspace(1e-4, 2.0, 400001)])
    mag, _, _ = control.frequency_response(h, w)  # python-control 0.10
    assert resonant_peak_db(zeta) == pytest.approx(20 * np.log10(np.max(mag)), abs=1e-7)
    if zeta >= 1 / math.sqrt(2):
        assert resonant_peak_db(zeta) == 0.0


@pytest.mark.parametrize("zeta", [0.0, -0.1])
def test_no_resonant_peak_without_damping(zeta):
    """A pair with zero or negative damping has no finite resonant peak: None (the peak of an undamped pair is infinite)."""
    from netloop.analysis.second_order import resonant_peak_db

    assert resonant_peak_db(zeta) is None
