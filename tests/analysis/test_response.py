"""Linear ratios in decibels, the one conversion every report of a modulus margin uses."""

from __future__ import annotations

import math

import pytest

from netloop.analysis.response import ratio_db


@pytest.mark.parametrize("value, db", [(10.0, 20.0), (1.0, 0.0), (0.5, -6.0206), (0.1, -20.0), (2.0, 6.0206), (1e-6, -120.0)])
def test_ratio_db(value, db):
    """20 log10 of a magnitude (the definition of the decibel for amplitude ratios)."""
    assert ratio_db(value) == pytest.approx(db, abs=1e-4)


def test_ratio_db_of_zero_and_of_nothing():
    """A zero magnitude is -inf dB (the limit of 20 log10 x as x falls to 0) and None stays None (no quantity)."""
    assert ratio_db(0.0) == -math.inf and ratio_db(None) is None
