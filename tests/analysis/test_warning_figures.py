"""Warnings and branch choices of the analysis that quote a figure: each against the closed form of the loop it is about."""

from __future__ import annotations

import math

import control
import numpy as np
import pytest
from analysis_loops import sample

from netloop.analysis import analyse
from netloop.analysis.response import Response

TWO_PI = 2.0 * math.pi
S = control.tf("s")
W = TWO_PI


def _coupled(f):
    """1e3 (s/w10)/(1 + s/w10) / ((1 + s/w1e6)(1 + s/w1e8)): an AC coupling with its zero at s = 0 and pole at 10 Hz."""
    s = 1j * W * np.asarray(f)
    return 1e3 * (s / (W * 10)) / (1 + s / (W * 10)) / ((1 + s / (W * 1e6)) * (1 + s / (W * 1e8)))


def test_an_ac_coupled_loop_swept_above_its_low_crossover_says_so_with_its_figures():
    """Swept from 100 Hz, the AC-coupled loop is flat there (k = 0) with |T| = 60 dB and leads by atan(10/100) = 5.7 deg
    (closed form): the warning quotes both figures and says the low gain crossover lies below the sweep."""
    f = np.logspace(2, 10, 161)
    a = analyse(f, _coupled(f), fit_poles=False)
    gain = 20 * math.log10(abs(_coupled(100.0)))  # closed form: 1e3 * 10 / sqrt(101) ... at 100 Hz
    lead = math.degrees(math.atan(10 / 100) - math.atan(1e-4) - math.atan(1e-6))  # closed form of the phase at 100 Hz
    assert a.nyquist.origin_poles == 0
    assert (f"|T| is {gain:.4g} dB at 100 Hz, the bottom of the sweep, and its phase leads by {lead:.2g} deg: T falls toward "
            "DC (AC coupling), and its low gain crossover, with its own phase margin, lies below the sweep; start the sweep "
            "lower") in a.warnings


@pytest.mark.parametrize("loop, lo_hz", [
    (100 / (S + 1), 1e-4),  # one pole: lags from DC, never leads
    (control.tf([25], [1, 10, 10, 10]), 1e-2),  # the three-pole loop of test_outcomes.py
    (100 / (S / (TWO_PI * 1e-3) + 1), 1e-4),  # a pole a decade above the bottom: -5.7 deg there
])
def test_a_loop_that_lags_at_the_bottom_is_not_called_ac_coupled(loop, lo_hz):
    """A loop of poles only lags at every frequency (closed form: phase -sum atan(w/p) < 0), so nothing is said of an AC
    coupling however high |T| is at the bottom."""
    a = analyse(*sample(loop, lo_hz, 1e4), fit_poles=False)
    assert a.t[0].imag < 0  # the lag, read from the samples
    assert not any("AC coupling" in w for w in a.warnings)


def _sign_inverted_allpass(f, integrators: int):
    """-10 (1 - s/a)/(1 + s/a) / (s/a)^k with a = 2 pi 1 rad/s: |T| = 10 / (f/1 Hz)^k, phase 180 - 90 k - 2 atan(f / 1 Hz)."""
    s = 1j * W * np.asarray(f)
    return -10 * (1 - s / W) / (1 + s / W) / (s / W) ** integrators


@pytest.mark.parametrize("k, start, expected", [
    (0, 89.8, 89.8),  # 89.8 deg from 0 (C > 0), 90.2 from -180 (C < 0)
    (0, 90.2, -269.8),  # 89.8 deg from -180 + 360: on the C < 0 branch, one turn down
    (1, -0.2, -0.2),  # 89.8 deg from -90 (C > 0), 90.2 from -270 (C < 0)
    (1, 0.2, -359.8),  # 89.8 deg from -270 + 360: on the C < 0 branch, one turn down
])
def test_the_phase_starts_on_the_nearer_asymptote_branch(k, start, expected):
    """With k poles at s = 0 the unwrapped phase is anchored on the branch of the asymptote C / s^k (-90 k for C > 0,
    -180 - 90 k for C < 0) nearer the lowest sample (anchored_phase_deg): a sample 89.8 deg from one and 90.2 deg from the
    other is shifted by whole turns to within 89.8 deg of the first (the loop -10 (1 - s/a)/(1 + s/a)/(s/a)^k, whose closed
    form phase 180 - 90 k - 2 atan(f/1 Hz) is `start` modulo 360 at the lowest sample)."""
    half = (180.0 - 90.0 * k - start) / 2.0 % 180.0  # 2 atan(f0) = 180 - 90 k - start (mod 360)
    f0 = math.tan(math.radians(half))
    f = f0 * np.logspace(0, 3, 61)
    resp = Response.from_data(f, _sign_inverted_allpass(f, k))
    assert resp.bottom[0] == k  # the slope of 10 / f^k: -20 k dB/decade
    assert resp.phase_deg[0] == pytest.approx(expected, abs=1e-9)


def test_the_close_pass_warning_names_where_t_nears_minus_one():
    """T = k/(1 + s)^3 with k = 8 (1 + 1e-6) passes within 1e-6 of -1 at w = sqrt 3 (closed form: (1 + j sqrt 3)^3 = -8),
    so the angle of 1 + T turns by nearly 180 deg between two interpolated points there; the warning names that
    frequency, sqrt(3)/(2 pi) Hz, to the interpolation grid's step (1/320 decade)."""
    loop = 8 * (1 + 1e-6) / (S + 1) ** 3
    a = analyse(*sample(loop, 1e-3, 1e3), fit_poles=False)
    (reason,) = [r for r in a.nyquist.reasons if "T passes too close to -1" in r]
    near = float(reason.split("near ")[1].split(" Hz")[0])
    assert near == pytest.approx(math.sqrt(3) / TWO_PI, rel=10 ** (1 / 320) - 1)
