"""The level closed-loop peaking is measured from."""

from __future__ import annotations

import math

import pytest

from netloop.analysis.closed_loop import in_band_db


@pytest.mark.parametrize(
    "t0, level",
    [
        (100.0, 20 * math.log10(100 / 101)),  # regulated: |T/(1+T)| at the bottom of the sweep
        (2.0 - 1.0j, 20 * math.log10(abs((2 - 1j) / (3 - 1j)))),
        (1.0, 0.0),  # |T| = 1 exactly is not above 1: the ideal in-band value 1, 0 dB
        (-1.0 + 0.0j, 0.0),
        (0.5, 0.0),  # does not regulate at the bottom
    ],
)
def test_in_band_level(t0, level):
    """20 log10 |T/(1+T)| at the lowest frequency when |T| > 1 there, else 0 dB (Peaking.reference_db in results.py)."""
    assert in_band_db(t0) == pytest.approx(level, abs=1e-12)

