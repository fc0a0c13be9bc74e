"""Self-checks of one loop's data: whether it can support a verdict, and what to try when it cannot.

Each check gives a netloop.analysis.results.Check. A loop with a failed check is "inconclusive":
netloop never calls it PASS, FAIL or unstable, and says why and what to try. The checks here need
only the sampled return ratio; checks that need another simulation (a second break of the same
loop, the opened circuit's own poles) belong to the job that runs them and are added to its result.

nyquist-data  the Nyquist count is reliable: the sweep ends with |T| well below 1, starts where T
              has settled, and is sampled finely enough that the angle of 1 + T closes to whole
              turns (netloop.analysis.nyquist gives the reasons).
rhp-count     Z = N + P is a count: 0 or more. A negative Z means P, the open-loop RHP poles,
              does not fit the data, so neither "stable" nor "unstable" can be claimed.
"""

from __future__ import annotations

from netloop.analysis.results import Check, NyquistVerdict

__all__ = ["CHECK_NAMES", "nyquist_checks"]

CHECK_NAMES = ("nyquist-data", "rhp-count")


def _nyquist_advice(reasons: tuple[str, ...]) -> str:
    text = " ".join(reasons)
    tips = []
    if "ends at" in text or "top of the sweep" in text:
        tips.append("let the sweep run higher (drop --fmax, or raise it above the frequency where |T| falls well below 1)")
    if "crossover lies below the sweep" in text or "settled" in text:
        tips.append("let the sweep start lower (drop --fmin, or lower it)")
    if "whole number of turns" in text or "close to -1" in text or "coarse" in text:
        tips.append("sample more densely (raise --ppd)")
    return "; ".join(tips) or "widen the sweep and raise --ppd"


def nyquist_checks(nyquist: NyquistVerdict) -> tuple[Check, ...]:
    """The checks of the Nyquist count: its data (nyquist-data) and Z = N + P >= 0 (rhp-count)."""
    if nyquist.reliable:
        data = Check("nyquist-data", True, "the sweep covers the loop: the Nyquist count is reliable")
    else:
        data = Check("nyquist-data", False, "the Nyquist count is doubtful: " + "; ".join(nyquist.reasons), _nyquist_advice(nyquist.reasons))
    n, p, z = nyquist.encirclements, nyquist.open_loop_rhp_poles, nyquist.closed_loop_rhp_poles
    if z >= 0:
        count = Check("rhp-count", True, f"Z = N + P = {n} + {p} = {z}")
    else:
        count = Check(
            "rhp-count",
            False,
            f"Z = N + P = {n} + {p} = {z} is negative, which no circuit has: P = {p} open-loop right-half-plane "
            "pole(s) does not fit this data (the opened loop has unstable poles of its own, or the split leaves "
            "a path around the probe)",
            "check how the node was split (the 'decided by' line; netloop loops NETLIST), break the loop at another "
            "node, or give the opened loop's RHP pole count with --open-loop-rhp-poles",
        )
    return (data, count)
