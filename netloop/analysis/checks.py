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
              P does not fit the data, so neither "stable" nor "unstable" can be claimed. With P read
              from the fit, the same fit's closed-loop right-half-plane poles must number Z too: when
              they do not, the fit contradicts itself and P cannot be trusted (with P given, the
              Nyquist count stands and a disagreeing fit is only a warning).
operating-point  the DC operating point ngspice returned is credible: no node lies beyond the range of the
              circuit's independent DC voltage sources and ground by more than OP_SPAN_FACTOR times that
              range's span (operating_point_check). Beyond it ngspice found a false solution (a model driven
              far outside its range), or a current source drives a node nothing else holds (a device that is
              off), and margins read around it describe no intended bias. The job that
              ran the simulation supplies the voltages (netloop.jobs.measure.sample_loops).
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np

from netloop.analysis.nyquist import TOP_LIMIT_DB
from netloop.analysis.results import Check, NyquistVerdict

__all__ = ["CHECK_NAMES", "NEGLIGIBLE_DB", "OP_SPAN_FACTOR", "data_checks", "nyquist_checks", "operating_point_check"]

CHECK_NAMES = ("loop-present", "falls-at-top", "nyquist-data", "rhp-count", "operating-point")

OP_SPAN_FACTOR = 4.0
"""How far beyond the range of the independent DC voltage sources (and ground) a node of a credible operating
point may lie, in spans of that range. Our choice, with common practice behind it: in a DC operating point a
node leaves the rails only through diode drops, ideal dependent sources or current sources into resistors, and
the highest voltages designers expect from a supply, charge pumps and bootstrapped nodes (2-3 times the supply,
and those only when clocked), stay well inside 1 + 4 = 5 spans from ground. The false solutions seen on the
sky130 regulator (a 0-1.7 V range: a node at -409 V, another at -240 V) lie 140 to 240 spans beyond it."""

NEGLIGIBLE_DB = -60.0
"""A return ratio below this everywhere (|T| < 1/1000) is taken as no loop measured: it moves nothing a
designer could see (the closed-loop response differs from the opened one by under 0.1 %). Our choice;
common practice calls 60 dB below unity negligible."""

_TOP_REASON = ("the sweep ends at", "at the top of the sweep")


# What each doubt of the Nyquist count asks for, by the words its reason ends with (netloop.analysis.nyquist)
_START_LOWER = ("crossover lies below the sweep", "start the sweep lower")
_DENSER = ("whole number of turns", "sample more densely")
_START_HIGHER = ("start the sweep higher",)


def _nyquist_advice(reasons: tuple[str, ...]) -> str:
    tips = [tip for tip, words in (("let the sweep start lower (drop --fmin, or lower it)", _START_LOWER),
                                   ("sample more densely (raise --ppd)", _DENSER),
                                   ("let the sweep start where |T| is below 240 dB (raise --fmin)", _START_HIGHER))
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


def nyquist_checks(nyquist: NyquistVerdict, fit_rhp: int | None = None) -> tuple[Check, ...]:
    """The checks of the Nyquist count: its data (nyquist-data, but for the top of the sweep) and Z = N + P >= 0 (rhp-count).
    ``fit_rhp``: the closed-loop right-half-plane poles of the rational fit that P was read from; when they differ from Z,
    the fit contradicts itself and rhp-count fails too."""
    reasons = tuple(r for r in nyquist.reasons if not any(k in r for k in _TOP_REASON))
    if not reasons:
        data = Check("nyquist-data", True, "the sweep covers the loop: the Nyquist count is reliable" if nyquist.reliable
                     else "the sweep starts where T has settled and closes the count (the top of the sweep: falls-at-top)")
    else:
        data = Check("nyquist-data", False, "the Nyquist count is doubtful: " + "; ".join(reasons), _nyquist_advice(reasons))
    n, p, z = nyquist.encirclements, nyquist.open_loop_rhp_poles, nyquist.closed_loop_rhp_poles
    source = {"fit": "read from the data", "given": "given", "assumed": "assumed"}.get(nyquist.open_loop_rhp_from, "given")
    if z >= 0 and (fit_rhp is None or fit_rhp == z):
        count = Check("rhp-count", True, f"Z = N + P = {n} + {p} = {z} (P {source})")
    elif z >= 0:
        count = Check(
            "rhp-count",
            False,
            f"Z = N + P = {n} + {p} = {z} with P = {p} read from the rational fit of 1/(1+T), but the same fit has {fit_rhp} "
            "closed-loop right-half-plane pole(s): it contradicts itself (a pole of the opened loop that a closed-loop pole "
            "nearly cancels in the right half plane is dropped as the fit's own pole-zero pair), so P, and the verdict, "
            "cannot be read from this data",
            "give the opened loop's RHP pole count with --open-loop-rhp-poles (from the design: the unstable poles of the "
            "loop opened at this node)",
        )
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


def _volts(v: float) -> str:
    return f"{v:.4g} V"


def operating_point_check(voltages: Mapping[str, float], sources: Mapping[str, float]) -> Check:
    """operating-point, from the node voltages of the operating point and the voltage across each independent DC
    voltage source there (its v(p) - v(n)).

    The credible range runs from the lowest to the highest of the sources' voltages and ground (0 V); a node
    more than OP_SPAN_FACTOR spans beyond either end of it (or not a finite number) fails the check. With no
    source, or only 0 V sources (a circuit biased by current sources alone), nothing sets a range: the check
    passes as not applicable.
    """
    if not any(v != 0.0 for v in sources.values()):
        return Check("operating-point", True, "not applicable: no independent voltage source sets a voltage other than 0 V, "
                     "so nothing bounds the operating point")
    named = sorted(sources.items(), key=lambda kv: (kv[1], kv[0]))
    low, high = min(0.0, named[0][1]), max(0.0, named[-1][1])
    span = high - low
    floor, ceiling = low - OP_SPAN_FACTOR * span, high + OP_SPAN_FACTOR * span
    ends = (named[0][0] if named[0][1] < 0.0 else "ground", named[-1][0] if named[-1][1] > 0.0 else "ground")
    credible = (f"the range {_volts(low)} to {_volts(high)} of the independent voltage sources ({ends[0]} to {ends[1]}) "
                f"widened by {OP_SPAN_FACTOR:g} times its span on each side: {_volts(floor)} to {_volts(ceiling)}")

    def beyond(v: float) -> float:
        return math.inf if not math.isfinite(v) else max(floor - v, v - ceiling)

    # the farthest first; among nodes of one net (equal to 6 digits) the designer's own, outside subcircuits, first
    outside = sorted(((beyond(v), node, v) for node, v in voltages.items() if beyond(v) > 0.0),
                     key=lambda x: (-float(f"{x[0]:.6g}"), x[1].count("."), x[1]))
    if not outside:
        return Check("operating-point", True, f"every node of the operating point lies within {credible}")
    shown = ", ".join(f"{node} at {_volts(v)}" for _, node, v in outside[:3])
    more = f" and {len(outside) - 3} more node(s)" if len(outside) > 3 else ""
    nodes = ", ".join(f"v({node})" for _, node, _v in outside[:3])
    return Check(
        "operating-point",
        False,
        f"the operating point ngspice returned is not credible: {shown}{more} lie beyond {credible}; no bias of these "
        "sources reaches that: ngspice found a false solution (a device model driven far outside its range), or a "
        "current source drives a node that nothing else holds, and no margin read around it describes the intended circuit",
        f"steer ngspice to the intended bias: a .nodeset near it for {nodes}, or a start-up hint (.ic, a start-up "
        "path that sets the bias); when the netlist itself gives that bias, look for a current source into a node that "
        "only a resistance holds (a device that is off or of no size)",
    )
