"""The yield bounds are Clopper and Pearson's exact binomial bounds (Biometrika 26, 1934), and the samples a target needs
are the fewest whose bound reaches it.

Reference: scipy.stats.binomtest(...).proportion_ci(method="exact"), scipy's own Clopper-Pearson interval (scipy 1.17),
computed independently of our beta quantiles; and the closed form of the bound with no failure, (1 - C) ** (1 / n).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import binomtest

from netloop.jobs.statistics import interval, lower_bound, samples_needed, upper_bound

CASES = [(0, 10), (1, 10), (7, 10), (10, 10), (290, 300), (300, 300), (0, 1), (1, 1), (9990, 10000)]


@pytest.mark.parametrize("passed,n", CASES)
@pytest.mark.parametrize("confidence", [0.9, 0.95, 0.99])
def test_bounds_equal_scipys_exact_interval(passed, n, confidence):
    """The two-sided interval and both one-sided bounds equal scipy's exact (Clopper-Pearson) intervals to 1e-9."""
    two = binomtest(passed, n).proportion_ci(confidence, method="exact")  # scipy 1.17: Clopper-Pearson
    low = binomtest(passed, n, alternative="greater").proportion_ci(confidence, method="exact").low
    high = binomtest(passed, n, alternative="less").proportion_ci(confidence, method="exact").high
    assert interval(passed, n, confidence) == pytest.approx((two.low, two.high), abs=1e-9)
    assert lower_bound(passed, n, confidence) == pytest.approx(low, abs=1e-9)
    assert upper_bound(passed, n, confidence) == pytest.approx(high, abs=1e-9)


def test_three_hundred_samples_without_failure_show_ninety_nine_percent():
    """300 passing samples: the lower bound at 95 % is 0.05 ** (1/300) = 0.99006 (Clopper-Pearson with k = n), so
    the data supports yield >= 99 %; 299 is the fewest that do (ln 0.05 / ln 0.99 = 298.07)."""
    assert lower_bound(300, 300, 0.95) == pytest.approx(0.05 ** (1 / 300), rel=1e-12)
    assert lower_bound(300, 300, 0.95) > 0.99
    assert samples_needed(0.99, 0.95) == 299 == math.ceil(math.log(0.05) / math.log(0.99))
    assert lower_bound(298, 298, 0.95) < 0.99 <= lower_bound(299, 299, 0.95)


@pytest.mark.parametrize("target,confidence,rate", [(0.99, 0.95, 0.002), (0.9, 0.9, 0.05), (0.999, 0.99, 0.0), (0.95, 0.95, 0.01)])
def test_samples_needed_reach_the_target_at_the_failure_rate(target, confidence, rate):
    """The count returned reaches the target with its share of failures (rounded up), and one sample fewer does not."""
    n = samples_needed(target, confidence, rate)
    assert isinstance(n, int)  # a count of samples
    assert lower_bound(n - math.ceil(n * rate - 1e-9), n, confidence) >= target
    assert lower_bound(n - 1 - math.ceil((n - 1) * rate - 1e-9), n - 1, confidence) < target


def test_a_failure_rate_at_or_above_the_complement_makes_the_target_unreachable():
    """With 1 % of samples failing, no number of samples shows 99 % (the bound tends to 99 % from below)."""
    assert samples_needed(0.99, 0.95, 0.01) is None
    assert samples_needed(0.99, 0.95, 0.2) is None


def test_lower_bound_covers_the_true_yield_at_least_as_often_as_the_confidence():
    """Over 4000 binomial draws (numpy, seeded) the 95 % lower bound lies below the true yield in at least 95 % of
    them, as Clopper and Pearson's bound guarantees; a bound taken at 50 % confidence would not."""
    rng = np.random.default_rng(17)
    p, n = 0.93, 60
    draws = rng.binomial(n, p, size=4000)
    for confidence in (0.95, 0.5):
        bound = {k: lower_bound(k, n, confidence) for k in range(n + 1)}
        covered = np.mean([bound[int(k)] <= p for k in draws])
        assert covered >= 0.95 if confidence == 0.95 else covered < 0.9


@pytest.mark.parametrize("target,rate,message", [
    (1.0, 0.0, "the yield target must be between 0 and 1, got 1.0"), (0.0, 0.0, "the yield target must be between 0 and 1, got 0.0"),
    (0.9, 1.0, "the failure rate must be at least 0 and below 1, got 1.0"), (0.9, 1.5, "the failure rate must be at least 0 and below 1, got 1.5"),
    (0.9, -0.1, "the failure rate must be at least 0 and below 1, got -0.1")])
def test_samples_needed_refuse_a_target_or_failure_rate_outside_its_range(target, rate, message):
    """A yield target outside (0, 1), or a failure rate outside [0, 1), is refused with the value given (a failure rate
    of 1 or more is not a rate: no number of samples answers it, and saying None would hide the caller's mistake)."""
    with pytest.raises(ValueError, match=f"^{message}$"):
        samples_needed(target, 0.95, rate)
