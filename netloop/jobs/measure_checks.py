"""A measurement's checks that need more than its own data: the other placements of the bridging elements,
a second break of the same loop, and ngspice's own pole analysis of the closed circuit.

How a split is settled (docs/splitting.md says it for designers):

1. The split the rules give (netloop.probe.sides) is measured; its data checks itself
   (netloop.analysis.checks: loop-present, falls-at-top, nyquist-data, rhp-count).
2. When a check fails, or T has right-half-plane poles of its own (P > 0: the opened circuit is
   unstable by itself, and margins read off such a T are not the usual ones), and the node has
   bridging elements, the other placements are measured on a coarse sweep, one job each: every
   bridge moved alone, then all of them. The first placement whose data passes every check with
   P = 0 is measured in full and reported, with what was moved and why (the job check "split").
   When none passes, the measurement keeps its first split and the "split" check fails: the verdict
   is inconclusive, with what was tried.
3. A bridge the rules could not place (as close to both stages) is confirmed by a second break:
   the same node with that bridge on the other side, on a coarse sweep. Both are exact return
   ratios of the same circuit, so the closed-loop poles fitted from each 1/(1+T) must agree
   (the job check "second-break").
4. When P > 0 and the circuit is small, ngspice's own pole analysis of the closed circuit gives
   Z directly; N + P must equal it (the job check "closed-loop-pz").

Plain loops (no bridge at the node, every check passed, P = 0) run none of this.

Every measurement's operating point is checked too (the check "operating-point",
netloop.analysis.checks.operating_point_check): the simulation that measures T gives its node voltages, and
the independent voltage sources of the flattened netlist (``voltage_sources``) set the credible range.
That takes a separate ``op`` beside the first ac's own (SimJob.op_voltages; ngspice's ac keeps only the
saved vectors of its operating point), so it is run on circuits of at most OP_CHECK_MAX_ELEMENTS
flattened elements only (``op_sources``), as closed-loop-pz is.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np

from netloop.analysis.checks import operating_point_check
from netloop.analysis.poles import unexplained_share
from netloop.analysis.results import Check, LoopAnalysis
from netloop.graph import flatten
from netloop.netlist import Netlist, flat_element_count
from netloop.probe import ProbedNetlist

__all__ = ["OP_CHECK_MAX_ELEMENTS", "PLACEMENT_TRIES", "PZ_MAX_ELEMENTS", "PZ_UNEXPLAINED", "Trial", "analysis_doubts", "doubts", "fitted_rhp_poles", "moved",
           "op_check", "op_sources", "other_placements",
           "pair_placements", "poles_agree", "pz_check", "second_break_band", "second_break_check", "settle_split", "voltage_sources"]

PLACEMENT_TRIES = 4  # other placements measured at most (each one coarse job)
PZ_MAX_ELEMENTS = 400  # ngspice's pz is asked only on circuits this small (flattened elements): it is cheap there
PZ_UNEXPLAINED = 1e-2
"""ngspice's pz poles cross-check the Nyquist count only when they explain the measured 1/(1+T) to this share of its
largest value (netloop.analysis.poles.unexplained_share). Our choice: the closed loop's own poles leave 1e-14 of a
two-pole loop unexplained; a failed pole search leaves 0.7 to 0.9 (a Tow-Thomas biquad of three op-amp models: ngspice
listed one pole at 16 MHz eighteen times, and 0 in the right half plane, where a transient of the circuit grows)."""
# the check operating-point runs a separate op on circuits this small (flattened elements): there it costs a few of the
# sweeps' points (a 5,000-element RC ladder: 0.06 s, its first decade sweep 0.2 s), while on the 100,000-element ladder of
# benchmarks/check_speed.py one op took 13 s on the loaded 2-CPU development machine, as much as the sweeps themselves
OP_CHECK_MAX_ELEMENTS = 10_000
_POLE_RTOL = 2e-2  # two breaks' closed-loop poles agree to this (relative), the coarse sweep's fit included


@dataclass(frozen=True, slots=True)
class Trial:
    """One placement of the bridging elements, measured."""

    placement: Mapping[str, str]  # bridge label -> "driver" | "load" (empty: the rules' own split)
    probed: ProbedNetlist
    analysis: LoopAnalysis
    at: str = ""  # the name the net was broken under, when not the one asked for (a deeper name of the same net)
    opens: Check | None = None  # the check "opens-loop" (netloop.jobs.splits.LoopStructure), when it was asked

    @property
    def failed(self) -> tuple[Check, ...]:
        return tuple(c for c in (*self.analysis.checks, *((self.opens,) if self.opens else ())) if not c.passed)

    @property
    def good(self) -> bool:
        """Every check passed and the opened circuit is stable by itself (P = 0)."""
        return not doubts(self)


def fitted_rhp_poles(analysis: LoopAnalysis) -> int:
    """P when it was read from the data (0 when it was given or assumed)."""
    n = analysis.nyquist
    return n.open_loop_rhp_poles if n.open_loop_rhp_from == "fit" else 0


def analysis_doubts(analysis: LoopAnalysis) -> str:
    """Why a measured T is doubted, in one clause ("" when it is not): a failed check, or poles of T in the right half plane."""
    failed = [c for c in analysis.checks if not c.passed]
    if failed:
        return "; ".join(c.detail for c in failed)
    p = fitted_rhp_poles(analysis)
    if p:
        return (f"T has {p} right-half-plane pole(s) of its own: the opened circuit is unstable by itself, "
                "and margins read off such a T are not the usual ones")
    return ""


def doubts(trial: Trial) -> str:
    """Why a split is doubted, in one clause ("" when it is not)."""
    if trial.opens is not None and not trial.opens.passed:
        return trial.opens.detail
    return analysis_doubts(trial.analysis)


def other_placements(probed: ProbedNetlist) -> list[dict[str, str]]:
    """Placements to try: each bridge the rules placed moved alone (those they were unsure of first), then all moved."""
    movable = [b for b in probed.bridges if not b.given]
    flip = {"driver": "load", "load": "driver"}
    order = sorted(movable, key=lambda b: b.by_rule)  # stable: the unsure ones first, else in the split's order
    out = [{b.element: flip[b.side]} for b in order]
    if len(movable) > 1:
        out.append({b.element: flip[b.side] for b in movable})
    return out[:PLACEMENT_TRIES]


def pair_placements(p: ProbedNetlist, n: ProbedNetlist) -> list[tuple[dict[str, str], dict[str, str]]]:
    """Placements to try at a node pair: the k-th bridge of each half moved together (the halves mirror each other), then all."""
    flip = {"driver": "load", "load": "driver"}
    bp, bn = [b for b in p.bridges if not b.given], [b for b in n.bridges if not b.given]
    out = []
    for k in range(max(len(bp), len(bn))):
        out.append(({bp[k].element: flip[bp[k].side]} if k < len(bp) else {}, {bn[k].element: flip[bn[k].side]} if k < len(bn) else {}))
    if max(len(bp), len(bn)) > 1:
        out.append(({b.element: flip[b.side] for b in bp}, {b.element: flip[b.side] for b in bn}))
    return out[:PLACEMENT_TRIES]


def moved(placement: Mapping[str, str]) -> str:
    """"cc to the load side, rz to the driver side"."""
    return _moved(placement)


def _moved(placement: Mapping[str, str]) -> str:
    return ", ".join(f"{name} to the {side} side" for name, side in placement.items())


def _what(trial: Trial) -> str:
    """What a trial changed: "cc to the load side", "broke it as xamp.out", or both."""
    return ", ".join(p for p in (f"broke the net as {trial.at}" if trial.at else "", _moved(trial.placement)) if p)


def settle_split(first: Trial, measure_coarse: Callable[..., Trial | None],
                 alternatives: Callable[[], list[str]] = lambda: []) -> tuple[Trial | None, Check | None, list[Trial]]:
    """The placement to report, after ``first`` (the rules' split) and what ``measure_coarse`` gives for the others.

    Returns (the placement to measure in full, or None to keep ``first``; the job check "split", or
    None when there was nothing to settle; every trial measured). ``measure_coarse(placement, at=None)``
    gives None for a placement the probe refuses (the node would be left without a load); ``at`` names
    the net under another name. ``alternatives()`` gives such other names of the net (a deeper name inside
    the block that drives it), tried with the rules' own placement after the bridges are moved.
    """
    why = doubts(first)
    if not why:
        return None, None, []
    names = alternatives()
    if not first.probed.bridges and not names:
        return None, None, []
    trials = []
    tries = [(placement, None) for placement in other_placements(first.probed)] + [({}, name) for name in names]
    for placement, name in tries:
        trial = measure_coarse(placement, name)
        if trial is None:
            continue
        trials.append(trial)
        if trial.good:
            detail = (f"{_what(trial)}: with the rules' split, {why}; with this one every self-check passes "
                      f"and T has no right-half-plane pole")
            return trial, Check("split", True, detail), trials
    tried = "; ".join(f"{_what(t)}: {doubts(t) or 'passes'}" for t in trials) or "no other placement could be built"
    if first.failed:
        moving = f"no placement of the bridging elements ({', '.join(b.element for b in first.probed.bridges)})" if first.probed.bridges else ""
        other = f"no other name of the net ({', '.join(names)})" if names else ""
        check = Check("split", False, f"{' and '.join(p for p in (moving, other) if p)} "
                      f"passes the self-checks: as split, {why}; tried {tried}",
                      "name the driver side with --driver, break the loop at another node (netloop loops NETLIST lists the "
                      "candidates and what each opens), or widen the sweep")
    else:
        check = Check("split", True, f"kept the rules' placement ({why}); no other placement did better: tried {tried}")
    return None, check, trials


def _relevant(poles: tuple[complex, ...], f_max_hz: float) -> np.ndarray:
    p = np.asarray(poles, dtype=complex)
    return p[np.abs(p) < 2.0 * np.pi * f_max_hz]


def poles_agree(a: LoopAnalysis, b: LoopAnalysis, band_hz: float) -> tuple[bool, str]:
    """Whether two breaks' fitted closed-loop poles below ``band_hz`` agree (each near one of the other's), and how far apart."""
    if a.poles is None or b.poles is None:
        return True, "no pole fit to compare"
    pa, pb = _relevant(a.poles.poles_rad_s, band_hz), _relevant(b.poles.poles_rad_s, band_hz)
    if pa.size == 0 and pb.size == 0:
        return True, f"neither break has a closed-loop pole below {band_hz:.4g} Hz"
    if pa.size == 0 or pb.size == 0:
        return False, f"one break has {max(pa.size, pb.size)} closed-loop pole(s) below {band_hz:.4g} Hz, the other none"
    worst = max(float(np.min(np.abs(pb - p)) / abs(p)) for p in pa)
    worst = max(worst, max(float(np.min(np.abs(pa - p)) / abs(p)) for p in pb))
    return worst <= _POLE_RTOL, f"the closed-loop poles below {band_hz:.4g} Hz differ by at most {worst:.2g} (relative)"


def second_break_band(a: LoopAnalysis) -> float:
    """Where two breaks' closed-loop poles are compared: ten times the highest gain crossover, else the top of the sweep."""
    if a.gain_crossovers:
        return min(10.0 * max(c.freq_hz for c in a.gain_crossovers), float(a.freq_hz[-1]))
    return float(a.freq_hz[-1])


def second_break_check(first: Trial, measure_coarse: Callable[[Mapping[str, str]], Trial | None]) -> Check | None:
    """The check "second-break" for a split with a bridge the rules could not place; None when there is none."""
    unsure = [b for b in first.probed.bridges if not b.by_rule and not b.given]
    if not unsure:
        return None
    flip = {"driver": "load", "load": "driver"}
    placement = {b.element: flip[b.side] for b in unsure}
    other = measure_coarse(placement)
    if other is None:
        return None
    agree, how = poles_agree(first.analysis, other.analysis, second_break_band(first.analysis))
    detail = f"a second break, {_moved(placement)}: {how}"
    if agree:
        return Check("second-break", True, detail)
    return Check("second-break", False, detail + "; two exact breaks of one circuit must find the same closed-loop poles",
                 "sample more densely (raise --ppd), or break the loop at another node and compare (netloop compare)")


def pz_check(analysis: LoopAnalysis, poles: np.ndarray | None) -> Check | None:
    """The check "closed-loop-pz": Z = N + P against the right-half-plane count of ngspice's pz of the closed circuit, when its
    poles are the circuit's: they must explain the measured 1/(1+T) (PZ_UNEXPLAINED), or the check is not applicable."""
    if poles is None:
        return None
    poles = poles[np.isfinite(poles)]
    share = unexplained_share(analysis.freq_hz, analysis.t, poles)
    if share > PZ_UNEXPLAINED:  # ngspice's pole search failed: it found other poles than the circuit's
        return Check("closed-loop-pz", True, f"not applicable: ngspice's pole analysis of the closed circuit gave {poles.size} pole(s) "
                     f"that leave {share:.0%} of the measured 1/(1+T) unexplained (its pole search failed), so they check nothing")
    z_pz = int(np.sum(poles.real > 1e-9 * np.maximum(np.abs(poles), 1e-300)))
    n = analysis.nyquist
    detail = f"ngspice's pole analysis of the closed circuit finds {z_pz} right-half-plane pole(s); Z = N + P = {n.closed_loop_rhp_poles}"
    if z_pz == n.closed_loop_rhp_poles:
        return Check("closed-loop-pz", True, detail)
    return Check("closed-loop-pz", False, detail + ": P read from the data does not fit the circuit",
                 "give the opened loop's right-half-plane pole count with --open-loop-rhp-poles, or break the loop at another node")


def voltage_sources(netlist: Netlist) -> tuple[tuple[str, str, str], ...]:
    """The independent voltage sources of the flattened netlist, as (name, + node, - node), in circuit order."""
    flat = flatten(netlist)
    return tuple((name, *nodes[:2]) for name, kind, nodes in zip(flat.names, flat.kinds, flat.element_nodes) if kind == "V")


def op_sources(netlist: Netlist) -> tuple[tuple[str, str, str], ...] | None:
    """``voltage_sources`` of a circuit of at most OP_CHECK_MAX_ELEMENTS flattened elements; None (no check) for a larger one."""
    return voltage_sources(netlist) if flat_element_count(netlist) <= OP_CHECK_MAX_ELEMENTS else None


def op_check(sources: tuple[tuple[str, str, str], ...], voltages: Mapping[str, float]) -> Check:
    """The check "operating-point" of the node ``voltages`` ngspice returned (lower-case names, ground left out), each
    source's voltage read from them (a source with a node ngspice did not report, or not a finite number, is left out)."""
    def node(n: str) -> float | None:
        return 0.0 if n == "0" else voltages.get(n.lower())

    across = {}
    for name, plus, minus in sources:
        p, m = node(plus), node(minus)
        if p is not None and m is not None and math.isfinite(p - m):
            across[name] = p - m
    return operating_point_check(voltages, across)
