"""Property: for random rational loops the Nyquist verdict and the pole fit equal numpy.roots of den + num."""

from __future__ import annotations

import math

import numpy as np
from analysis_loops import poly_loop
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from netloop.analysis import analyse

log_mag = st.floats(min_value=-1.5, max_value=2.0)  # log10 of a pole/zero magnitude in rad/s
damping = st.floats(min_value=0.1, max_value=1.0)


@st.composite
def rational_loops(draw, rhp_poles: int):
    """(num, den, P, features): strictly proper, stable poles plus rhp_poles real RHP poles, maybe an integrator or a DC zero."""
    den = np.array([1.0])
    features = []
    for _ in range(draw(st.integers(1, 3))):
        w = 10 ** draw(log_mag)
        features.append(w)
        if draw(st.booleans()):
            z = draw(damping)
            den = np.polymul(den, [1 / w**2, 2 * z / w, 1.0])
        else:
            den = np.polymul(den, [1 / w, 1.0])
    for _ in range(rhp_poles):
        w = 10 ** draw(log_mag)
        features.append(w)
        den = np.polymul(den, [1 / w, -1.0])
    integrator = rhp_poles == 0 and draw(st.booleans())
    if integrator:
        den = np.polymul(den, [1.0, 0.0])
    num = np.array([1.0])
    if not integrator and len(den) > 2 and draw(st.booleans()):
        w = 10 ** draw(log_mag)
        features.append(w)
        num = np.polymul(num, [1 / w, 0.0])  # a zero at DC: an AC-coupled (band-pass) loop
    for _ in range(draw(st.integers(0, min(2, len(den) - len(num) - 1)))):
        w = 10 ** draw(log_mag)
        features.append(w)
        num = np.polymul(num, [1 / w, draw(st.sampled_from([1.0, -1.0]))])
    gain = 10 ** draw(st.floats(min_value=-1.0, max_value=2.5))
    sign = draw(st.sampled_from([1.0, 1.0, 1.0, -1.0]))  # mostly negative feedback, sometimes positive
    return sign * gain * num, den, rhp_poles, features


def check(num, den, p, features):
    ratios = np.diff(np.sort(np.log10(features)))
    assume(ratios.size == 0 or ratios.min() > 0.05)  # no pole-zero cancellation (P would be wrong)
    char = np.polyadd(den, num)
    roots = np.roots(char)
    assume(np.all(np.isfinite(roots)) and roots.size == len(den) - 1)
    # keep loops whose closed-loop poles are not on (or within 3% of) the imaginary axis:
    # there the margins are zero and no finite sampling can decide
    assume(np.all(np.abs(roots.real) > 0.03 * np.abs(roots)))
    open_poles = np.roots(den)
    gap = np.min(np.abs(roots[:, None] - open_poles[None, :]), axis=1)
    # a closed-loop pole within 1e-3 of an open-loop pole hides under S's zero there (see poles.py)
    assume(np.all(gap > 1e-3 * np.maximum(np.abs(roots), 1e-12)))
    w_lo = min(features) / 1e3
    assume(np.all(np.abs(roots) > 10 * w_lo))  # a closed-loop pole at DC is no test of the count
    loop = poly_loop(num, den)
    w_hi = max(features + list(np.abs(roots))) * 1e3
    while abs(loop(1j * w_hi)) > 1e-3:
        w_hi *= 10
    n = int(round(math.log10(w_hi / w_lo) * 40)) + 1
    f = np.logspace(math.log10(w_lo / (2 * math.pi)), math.log10(w_hi / (2 * math.pi)), n)
    a = analyse(f, loop(2j * np.pi * f), open_loop_rhp_poles=p)
    expected = int(np.sum(roots.real > 0))  # numpy.roots of the characteristic polynomial den + num
    assert a.nyquist.reliable, a.nyquist.reasons
    assert a.nyquist.closed_loop_rhp_poles == expected
    assert a.stable == (expected == 0)
    assert a.poles is not None and a.poles.rhp_count == expected
    assert a.poles.agrees_with_nyquist
    if p == 0 and len(a.gain_crossovers) == 1:
        # with no open-loop RHP poles and one crossover, the sign of the phase margin read on the
        # continuous branch is the classical stability test (Bode; the Nyquist criterion)
        assert (a.margins.phase_margin_deg > 0) == (expected == 0)


@settings(max_examples=40, derandomize=True, deadline=None, suppress_health_check=[HealthCheck.filter_too_much])
@given(rational_loops(rhp_poles=0))
def test_nyquist_count_matches_roots_for_stable_open_loops(loop):
    """With P = 0 (and sometimes an integrator or positive feedback) Z from Nyquist and from the AAA fit equal the RHP roots."""
    check(*loop)


@settings(max_examples=30, derandomize=True, deadline=None, suppress_health_check=[HealthCheck.filter_too_much])
@given(st.integers(1, 2).flatmap(lambda p: rational_loops(rhp_poles=p)))
def test_nyquist_count_matches_roots_with_open_loop_rhp_poles(loop):
    """With P = 1 or 2 known open-loop RHP poles, Z = N + P equals the RHP roots of den + num, as does the pole fit."""
    check(*loop)
