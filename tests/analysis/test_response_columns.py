"""The response's one two-column spline is, column by column and bit for bit, scipy's spline of the gain and of the phase alone."""

from __future__ import annotations

import control
import numpy as np
import pytest
from analysis_loops import sample
from scipy.interpolate import make_interp_spline

from netloop.analysis.response import Response

S = control.tf("s")


@pytest.mark.parametrize("loop, lo_hz, hi_hz, per_decade", [
    (control.tf([25], [1, 10, 10, 10]), 1e-4, 1e3, 20),  # the three-pole loop of test_outcomes.py: quintic
    (1e4 * (S / 10 + 1) ** 2 / ((S + 1e-3) * (S / 0.1 + 1) * (S + 1) * (S / 100 + 1) ** 2), 1e-5, 1e5, 7),  # conditionally stable
    (2 / (S * (S + 1)), 1e-1, 1e0, 4),  # 5 samples: cubic
])
def test_each_column_is_the_spline_of_its_own_data(loop, lo_hz, hi_hz, per_decade):
    """Gain, phase and T read from the response, on its dense grid and between samples, equal scipy's make_interp_spline of
    the gain alone and of the phase alone (reference: scipy 1.15+, evaluated separately), bit for bit; the dense T is
    t_at on dense_x, read-only."""
    r = Response.from_data(*sample(loop, lo_hz, hi_hz, per_decade=per_decade))
    k = 5 if r.x.size >= 6 else 3
    gain, phase = make_interp_spline(r.x, r.gain_db, k=k), make_interp_spline(r.x, r.phase_deg, k=k)
    xs, t = r.dense_t(16)
    points = np.concatenate([xs, np.random.default_rng(7).uniform(r.x[0], r.x[-1], 200)])
    assert r.gain_at(points).tobytes() == gain(points).tobytes() and r.phase_at(points).tobytes() == phase(points).tobytes()
    assert float(r.gain_at(points[5])) == float(gain(points[5]))  # one point at a time too, as the root finders ask
    alone = 10.0 ** (gain(xs) / 20.0) * np.exp(1j * np.radians(phase(xs)))  # T from the two splines, as t_at has it
    assert t.tobytes() == alone.tobytes() == r.t_at(xs).tobytes() and xs.tobytes() == r.dense_x(16).tobytes()
    assert not t.flags.writeable and not xs.flags.writeable and r.dense_t(16)[1] is t
