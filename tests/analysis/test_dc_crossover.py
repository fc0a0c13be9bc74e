"""The phase crossover at DC of a loop with positive feedback at DC: its angle, its gain read at the lowest sample, its kind."""

from __future__ import annotations

import math

import numpy as np
import pytest

from netloop.analysis import analyse


def _one_pole(k, f_lo):
    """T = -k/(1 + s/w1), w1 = 1 rad/s, sampled 20 points a decade from f_lo to 1 kHz (T(0) = -k: positive feedback at DC)."""
    f = np.logspace(np.log10(f_lo), 3, int(round((3 - np.log10(f_lo)) * 20)) + 1)
    return f, -k / (1 + 2j * math.pi * f)


@pytest.mark.parametrize(
    "k, f_lo, kind",
    [
        (5.0, 1e-4, "lower"),  # |T(0)| = 5 > 1: lowering the gain reaches -1
        (0.5, 1e-4, "upper"),  # |T(0)| = 0.5 < 1: raising it does
        (1.05, 1e-4, "lower"),  # 0.42 dB, just above 0 dB
        (0.95, 1e-4, "upper"),
        (1.0, 1e-12, "lower"),  # |T| = 1/sqrt(1 + (2 pi 1e-12)^2) is 1.0 exactly in floating point: 0 dB is "lower"
    ],
)
def test_dc_phase_crossover(k, f_lo, kind):
    """T(0) = -k lies on the negative real axis at -180 deg (the continuous branch of a loop with positive feedback at DC,
    results.py): the crossover at 0 Hz has that angle, the gain |T| of the lowest sample (closed form, not a neighbour's),
    the gain margin -gain, and kind "upper" below 0 dB, "lower" at or above (PhaseCrossover's docstring)."""
    f, t = _one_pole(k, f_lo)
    a = analyse(f, t, fit_poles=False)
    dc = a.phase_crossovers[0]
    gain = 20 * math.log10(abs(t[0]))  # closed form at the lowest sample
    assert dc.freq_hz == 0.0 and dc.phase_deg == -180.0
    assert dc.gain_db == pytest.approx(gain, rel=1e-12, abs=1e-15) and dc.gain_margin_db == -dc.gain_db
    assert dc.kind == kind
