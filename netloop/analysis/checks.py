"""Self-checks of one loop's data: whether it can support a verdict, and what to try when it cannot.

Each check gives a netloop.analysis.results.Check. A loop with a failed check is "inconclusive":
netloop never calls it PASS, FAIL or unstable, and says why and what to try. The checks here need
only the sampled return ratio; checks that need another simulation (a second break of the same
loop, the closed circuit's own poles) belong to the job that runs them and are added to its result.

loop-present  |T| rises above NEGLIGIBLE_DB somewhere in the sweep. A T below it everywhere
              measured no loop (a split that leaves the loop closed on one side, a dead bias).
falls-at-top  |T| is at most TOP_LIMIT_DB (-20 dB) at the top of the sweep. A T that levels off
              above it there has a path around the probe (a bridging element on the side where the
              loop stays closed), or gain beyond the sweep.
nyquist-data  the Nyquist count is reliable: the sweep starts where T has settled and is sampled
              finely enough that the angle of 1 + T closes to whole turns (netloop.analysis.nyquist
              gives the reasons; the top of the sweep is falls-at-top's).
rhp-count     Z = N + P is a count: 0 or more. P, the open-loop right-half-plane poles, is read from
              the data (the rational fit of 1/(1+T)) unless the caller gives it. A negative Z means
              P does not fit the data, so neither "stable" nor "unstable" can be claimed.
"""

from __future__ import annotations

import numpy as np

from netloop.analysis.nyquist import TOP_LIMIT_DB
from netloop.analysis.results import Check, NyquistVerdict

__all__ = ["CHECK_NAMES", "NEGLIGIBLE_DB", "data_checks", "nyquist_checks"]

CHECK_NAMES = ("loop-present", "falls-at-top", "nyquist-data", "rhp-count")

NEGLIGIBLE_DB = -60.0
"""A return ratio below this everywhere (|T| < 1/1000) is taken as no loop measured: it moves nothing a
designer could see (the closed-loop response differs from the opened one by under 0.1 %). Our choice;
common practice calls 60 dB below unity negligible."""

_TOP_REASON = ("the sweep ends at", "at the top of the sweep")


# What each doubt of the Nyquist count asks for, by the words its reason ends with (netloop.analysis.nyquist)
_START_LOWER = ("crossover lies below the sweep", "start the sweep lower")
_DENSER = ("whole number of turns", "sample more densely")


def _nyquist_advice(reasons: tuple[str, ...]) -> str:
    tips = [tip for tip, words in (("let the sweep start lower (drop --fmin, or lower it)", _START_LOWER),
                                   ("sample more densely (raise --ppd)", _DENSER))
            if any(word in reason for reason in reasons for word in words)]
    return "; ".join(tips) or "widen the sweep and raise --ppd"


def data_checks(freq_hz: np.ndarray, gain_db: np.ndarray) -> tuple[Check, ...]:
    """loop-present and falls-at-top, from |T| in dB over the sweep."""
    peak = float(np.max(gain_db))
    if peak >= NEGLIGIBLE_DB:
        present = Check("loop-present", True, f"|T| reaches {peak:.4g} dB")
    else:
        present = Check(
            "loop-present",
            False,
            f"|T| is below {NEGLIGIBLE_DB:g} dB at every frequency (at most {peak:.4g} dB): the break measured no loop",
            "check how the node was split (the 'decided by' line; netloop loops NETLIST shows which loops the split opens), "
            "name the driver with --driver, break the loop at another node, or check the bias (a device that is off carries no signal)",
        )
    top = float(gain_db[-1])
    if top <= TOP_LIMIT_DB:
        falls = Check("falls-at-top", True, f"|T| falls to {top:.4g} dB at the top of the sweep ({freq_hz[-1]:.4g} Hz)")
    else:
        falls = Check(
            "falls-at-top",
            False,
            f"the sweep ends at {freq_hz[-1]:.4g} Hz with |T| still {top:.4g} dB, not below {TOP_LIMIT_DB:g} dB: the loop has gain "
            "beyond the sweep, or a path around the probe keeps |T| from falling (an element that bridges the split, left on the "
            "side where it closes the loop)",
            "let the sweep run higher (drop --fmax, or raise it), check the split (a capacitor or resistor from the node to "
            "another node of the loop belongs with the stage it wraps), or break the loop at another node",
        )
    return present, falls


def nyquist_checks(nyquist: NyquistVerdict) -> tuple[Check, ...]:
    """The checks of the Nyquist count: its data (nyquist-data, but for the top of the sweep) and Z = N + P >= 0 (rhp-count)."""
    reasons = tuple(r for r in nyquist.reasons if not any(k in r for k in _TOP_REASON))
    if not reasons:
        data = Check("nyquist-data", True, "the sweep covers the loop: the Nyquist count is reliable" if nyquist.reliable
                     else "the sweep starts where T has settled and closes the count (the top of the sweep: falls-at-top)")
    else:
        data = Check("nyquist-data", False, "the Nyquist count is doubtful: " + "; ".join(reasons), _nyquist_advice(reasons))
    n, p, z = nyquist.encirclements, nyquist.open_loop_rhp_poles, nyquist.closed_loop_rhp_poles
    source = {"fit": "read from the data", "given": "given", "assumed": "assumed"}.get(nyquist.open_loop_rhp_from, "given")
    if z >= 0:
        count = Check("rhp-count", True, f"Z = N + P = {n} + {p} = {z} (P {source})")
    else:
        count = Check(
            "rhp-count",
            False,
            f"Z = N + P = {n} + {p} = {z} is negative, which no circuit has: P = {p} open-loop right-half-plane "
            f"pole(s) ({source}) does not fit this data (the opened loop has unstable poles of its own that the data does not "
            "show, or the split leaves a path around the probe)",
            "check how the node was split (the 'decided by' line; netloop loops NETLIST), break the loop at another "
            "node, or give the opened loop's RHP pole count with --open-loop-rhp-poles",
        )
    return (data, count)
