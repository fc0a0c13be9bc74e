"""Binomial confidence bounds on a yield: Clopper and Pearson's exact interval (1934) and the samples a target needs.

C. J. Clopper and E. S. Pearson, "The use of confidence or fiducial limits illustrated in the case of
the binomial", Biometrika 26 (1934) 404-413. With k passing samples out of n, the exact bounds are
quantiles of beta distributions, beta.ppf(q, a, b) = betaincinv(a, b, q), the inverse of the regularized incomplete
beta function (scipy.special.betaincinv: the function scipy.stats.beta.ppf calls, without the second or two that
importing scipy.stats costs every run):

    one-sided lower bound at confidence C     beta.ppf(1 - C, k, n - k + 1)      (0 when k = 0)
    one-sided upper bound at confidence C     beta.ppf(C, k + 1, n - k)          (1 when k = n)
    two-sided interval at confidence C        the one-sided bounds at (1 + C) / 2

"Yield >= Y at confidence C" is the one-sided lower bound: with n samples and no failure it is
(1 - C) ** (1 / n), so 300 passing samples show yield >= 99.0 % at 95 % confidence, and a target Y
needs n >= ln(1 - C) / ln(Y) samples that all pass (299 for 99 % at 95 %).
"""

from __future__ import annotations

import math

__all__ = ["interval", "lower_bound", "samples_needed", "upper_bound"]


def _check(passed: int, n: int, confidence: float) -> None:
    if not 0 <= passed <= n:
        raise ValueError(f"passed must be between 0 and n, got {passed} of {n}")
    if not 0 < confidence < 1:
        raise ValueError(f"confidence must be between 0 and 1, got {confidence}")


def lower_bound(passed: int, n: int, confidence: float) -> float:
    """The one-sided Clopper-Pearson lower bound on the yield at ``confidence`` (0 with no samples)."""
    _check(passed, n, confidence)
    if passed == 0:
        return 0.0
    if passed == n:
        return (1.0 - confidence) ** (1.0 / n)  # the closed form of beta.ppf(1 - C, n, 1)
    from scipy.special import betaincinv

    return float(betaincinv(passed, n - passed + 1, 1.0 - confidence))


def upper_bound(passed: int, n: int, confidence: float) -> float:
    """The one-sided Clopper-Pearson upper bound on the yield at ``confidence`` (1 with no samples)."""
    _check(passed, n, confidence)
    if passed == n:
        return 1.0
    if passed == 0:
        return 1.0 - (1.0 - confidence) ** (1.0 / n)  # beta.ppf(C, 1, n) in closed form
    from scipy.special import betaincinv

    return float(betaincinv(passed + 1, n - passed, confidence))


def interval(passed: int, n: int, confidence: float) -> tuple[float, float]:
    """The two-sided Clopper-Pearson interval at ``confidence``: each side at (1 + confidence) / 2."""
    side = (1.0 + confidence) / 2.0
    return lower_bound(passed, n, side), upper_bound(passed, n, side)


def samples_needed(target: float, confidence: float, failure_rate: float = 0.0, limit: int = 10_000_000) -> int | None:
    """The samples that show yield >= ``target`` at ``confidence`` (one-sided lower bound) when a fraction
    ``failure_rate`` of them fails (the failures rounded up). With no failure the count is exact, the fewest
    that do; with failures it is an estimate (the bound moves in steps as failures are rounded), found by
    bisection. None when no number of samples can: the failure rate is 1 - target or more, or more than
    ``limit`` samples would be needed."""
    if not 0 < target < 1:
        raise ValueError(f"the yield target must be between 0 and 1, got {target}")
    if not 0 <= failure_rate < 1:
        raise ValueError(f"the failure rate must be at least 0 and below 1, got {failure_rate}")
    if failure_rate >= 1.0 - target:
        return None

    def enough(n: int) -> bool:
        return lower_bound(n - math.ceil(n * failure_rate - 1e-9), n, confidence) >= target

    first = max(1, math.ceil(math.log(1.0 - confidence) / math.log(target)))  # none fewer than with no failure
    if failure_rate == 0.0:
        while first > 1 and enough(first - 1):  # rounding of the logarithms, either way
            first -= 1
        while not enough(first):
            first += 1
        return first
    low, high = first - 1, first
    while not enough(high):
        low, high = high, high * 2
        if high > limit:
            return None
    while high - low > 1:
        mid = (low + high) // 2
        if enough(mid):
            high = mid
        else:
            low = mid
    return high
