"""Central differences and their stated error, on functions whose derivatives are known exactly."""

from __future__ import annotations

import math

import pytest

from netloop.jobs.sensitivity.records import STEPS, Slope, central_difference

LN10 = math.log(10.0)


def test_central_difference_of_a_cubic_and_its_error():
    """For F = phi^3 + 2 phi the central difference is 2 + h^2 and its estimated error is exactly h^2 (calculus)."""
    h = 0.01
    values = {k: (k * h) ** 3 + 2 * (k * h) for k in STEPS}
    slope = central_difference(values, h)
    assert slope.per_decade == pytest.approx((2 + h * h) * LN10, rel=1e-12)
    assert slope.error == pytest.approx(h * h * LN10, rel=1e-6)
    assert slope.relative_error == pytest.approx(h * h / (2 + h * h), rel=1e-6)


def test_a_missing_figure_gives_no_slope():
    """When the figure does not exist at one of the four values (no crossover there), there is no slope."""
    values = {1: 1.0, -1: 0.5, 2: None, -2: 0.2}
    assert central_difference(values, 0.01) == Slope(None, None)
    assert Slope(None, None).relative_error is None
