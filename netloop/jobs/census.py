"""The loop census: every loop group with its candidate breaks measured by one coarse sweep, and the break chosen for each.

For each group, the best few candidate breaks (netloop.graph ranks them; netloop.jobs.discover
states each from the probe's real split) are broken together in one deck, as ``compare`` does,
and swept once at a few points per decade: one simulator job per group. From each candidate's
coarse T the census keeps |T| at DC, its peak, where it first falls through 0 dB and where the
sweep ends (``CoarseBreak``). A group "can ring" when |T| exceeds 0 dB somewhere at one of its
breaks; the others cannot ring on their own.

The break of a group (``choose``) is the best-ranked candidate whose coarse T is a measurement:
not about 0 (|T| above ``NEGLIGIBLE_DB`` somewhere: a break where T is about 0 measures nothing and
would pass as a loop that does not regulate) and falling well below 1 at the top of the sweep
(a T that stays flat there means a path around the probe). A candidate that fails either is
passed over while another passes both; the reason names what was passed over and why. When |T|
exceeds 0 dB at some break of the group, a break where it does is preferred: a break where |T|
stays below 1 in such a group measures a minor loop with the main one closed around it, and would
report a loop that regulates as one that does not.
"""

from __future__ import annotations

import logging
import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np

from netloop.errors import NetloopError
from netloop.graph import LoopDiscovery, LoopGroup
from netloop.graph.loop_records import BreakCandidate
from netloop.jobs.compare import compare_job
from netloop.jobs.measure import return_ratio
from netloop.netlist import Netlist
from netloop.probe import ProbedNetlist, break_loop
from netloop.sim import AcSweep, Simulator

__all__ = [
    "COARSE_BREAKS",
    "LARGE_COARSE_BREAKS",
    "COARSE_SWEEP",
    "FALLS_DB",
    "NEGLIGIBLE_DB",
    "Census",
    "CoarseBreak",
    "GroupCensus",
    "choose",
    "coarse_group",
    "why_at",
]

COARSE_SWEEP = AcSweep("dec", 3, 1e-2, 1e12)  # 3 points a decade, 10 mHz to 1 THz: 43 frequencies
COARSE_BREAKS = 6  # candidates of a group measured by the coarse sweep (in rank order, those the probe can split)
LARGE_COARSE_BREAKS = 3  # ... on a netlist of netloop.sim.SPLIT_MIN_ELEMENTS elements or more (each AC run redoes its operating point)
NEGLIGIBLE_DB = -60.0  # |T| below this everywhere: the break measures nothing (common practice: 1/1000 is no loop gain)
FALLS_DB = -20.0  # |T| at the top of the coarse sweep below this: T falls as a loop's must (the widening rule of measure)

_log = logging.getLogger("netloop")


@dataclass(frozen=True, slots=True)
class CoarseBreak:
    """One candidate break of a group, measured by the coarse sweep (or why it was not)."""

    node: str
    dc_db: float | None = None  # 20 log10 |T| at the bottom of the sweep
    peak_db: float | None = None  # the largest |T| over the sweep, dB
    peak_hz: float | None = None
    unity_hz: float | None = None  # the first frequency where |T| falls through 0 dB (interpolated), None if it never does
    top_db: float | None = None  # |T| at the top of the sweep
    error: str = ""  # why this break was not measured
    refused: bool = False  # the probe cannot break the node (not a failed simulation)

    @property
    def measured(self) -> bool:
        return self.peak_db is not None

    @property
    def negligible(self) -> bool:
        """|T| below NEGLIGIBLE_DB everywhere: the break measures nothing."""
        return self.peak_db is not None and self.peak_db < NEGLIGIBLE_DB

    @property
    def falls(self) -> bool:
        """|T| is well below 1 at the top of the sweep."""
        return self.top_db is not None and self.top_db < FALLS_DB

    @property
    def can_ring(self) -> bool:
        """|T| exceeds 0 dB somewhere."""
        return self.peak_db is not None and self.peak_db > 0.0

    @property
    def usable(self) -> bool:
        return self.measured and not self.negligible and self.falls


@dataclass(frozen=True, slots=True)
class GroupCensus:
    """One loop group: its candidates re-ranked with the coarse sweep (the chosen break first), and why that break."""

    group: LoopGroup  # candidates re-ranked: the chosen break is ``group.best``
    coarse: tuple[CoarseBreak, ...]  # the candidates measured (or tried), in their rank order before the choice
    chosen: str | None  # the name broken (the candidate's break_name); None when no candidate can be broken
    why: str  # one sentence: why this break, or why none
    passed_over: tuple[str, ...] = ()  # "node (reason)" for better-ranked candidates the coarse sweep ruled out
    passed_over_briefly: tuple[str, ...] = ()  # "node: a few words" for the same candidates
    # a fully differential group: its best-ranked usable candidate with a mirror image and that mirror
    # (netloop.graph.mirror), where `check` measures both modes; None for any other group
    pair: tuple[str, str] | None = None

    @property
    def label(self) -> str:
        return self.group.label if self.chosen else f"loop {self.group.index}"

    @property
    def can_ring(self) -> bool | None:
        """True when |T| exceeds 0 dB at a measured break of the group, False when measured and never, None when not measured."""
        measured = [c for c in self.coarse if c.measured and not c.negligible]
        if not measured:
            return None
        return any(c.can_ring for c in measured)

    def coarse_at(self, node: str) -> CoarseBreak | None:
        return next((c for c in self.coarse if c.node == node), None)


@dataclass(frozen=True, slots=True)
class Census:
    """Every loop group of a netlist with its coarse measurement and chosen break."""

    source: str
    discovery: LoopDiscovery  # groups as found, candidates re-ranked by the census
    groups: tuple[GroupCensus, ...]  # in group order
    swept: bool  # False when the coarse sweep was not run (loop structure and probe splits only)
    notes: tuple[str, ...] = ()


def _db(x: float) -> float:
    return 20.0 * math.log10(x) if x > 0 else -math.inf


def coarse_figures(node: str, freq_hz: np.ndarray, t: np.ndarray) -> CoarseBreak:
    """The coarse figures of one sampled T."""
    mag = np.abs(t)
    if mag.size == 0 or not np.all(np.isfinite(mag)):
        return CoarseBreak(node, error="the coarse sweep gave no finite T")
    k = int(np.argmax(mag))
    unity = None
    above = mag >= 1.0
    for i in range(1, mag.size):
        if above[i - 1] and not above[i]:
            a, b = np.log10(max(mag[i - 1], 1e-300)), np.log10(max(mag[i], 1e-300))
            w = a / (a - b) if a != b else 0.0
            unity = float(10 ** (np.log10(freq_hz[i - 1]) + w * (np.log10(freq_hz[i]) - np.log10(freq_hz[i - 1]))))
            break
    return CoarseBreak(node, _db(float(mag[0])), _db(float(mag[k])), float(freq_hz[k]), unity, _db(float(mag[-1])))


def _breakable(c: BreakCandidate) -> bool:
    return c.split_checked and not c.refused and bool(c.opened)


def coarse_group(parsed: Netlist, group: LoopGroup, simulator: Simulator, *, method: str = "tian", breaks: int = COARSE_BREAKS,
                 timeout_s: float = 600.0) -> tuple[CoarseBreak, ...]:
    """The first ``breaks`` breakable candidates of a group, measured together by one coarse sweep (one simulator job).

    Each probe is placed with the driver side its candidate states (the probe's own split of the node,
    netloop.jobs.discover.probe_splits), so later probes in the deck never change how an earlier node is divided.
    """
    chosen = [c for c in group.candidates if _breakable(c)][:breaks]
    out: dict[str, CoarseBreak] = {}
    current = parsed
    placed: list[tuple[str, ProbedNetlist]] = []
    for c in chosen:
        try:
            q = break_loop(current, c.break_name, driver=",".join(c.driver_side))
        except NetloopError as exc:
            out[c.node] = CoarseBreak(c.node, error=str(exc), refused=True)
            continue
        current = q.netlist
        placed.append((c.node, q))
    if placed:
        try:
            job = compare_job(current, [q for _, q in placed], (COARSE_SWEEP,), label=f"{group.label}: coarse sweep", timeout_s=timeout_s)
            _log.info("%s: measuring %d candidate break(s) with a coarse sweep", f"loop {group.index}", len(placed))
            result = simulator.run(job)
            for k, (node, q) in enumerate(placed):
                series = dict(result.run(f"{k}.series").vectors)
                shunt = dict(result.run(f"{k}.shunt").vectors)
                freq = np.asarray(result.run(f"{k}.series").freq_hz, dtype=float)
                out[node] = coarse_figures(node, freq, return_ratio(q, series, shunt, method))
        except NetloopError as exc:
            for node, _ in placed:
                out.setdefault(node, CoarseBreak(node, error=f"the coarse sweep failed: {exc}"))
    return tuple(out[c.node] for c in chosen if c.node in out)


def _figures(c: CoarseBreak) -> str:
    if not c.measured:
        return f"not measured ({c.error})"
    parts = [f"|T| {c.dc_db:.0f} dB at DC"] if c.dc_db is not None and math.isfinite(c.dc_db) else []
    if c.unity_hz is not None:
        parts.append(f"0 dB near {_hz(c.unity_hz)}")
    elif c.peak_db is not None and c.peak_db <= 0:
        parts.append(f"at most {c.peak_db:.0f} dB")
    if c.top_db is not None and math.isfinite(c.top_db):
        parts.append(f"{c.top_db:.0f} dB at {_hz(COARSE_SWEEP.fstop_hz)}")
    return ", ".join(parts)


def _hz(f: float) -> str:
    for scale, unit in ((1e12, "THz"), (1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz"), (1.0, "Hz"), (1e-3, "mHz")):
        if f >= scale:
            return f"{f / scale:.3g} {unit}"
    return f"{f:.3g} Hz"


def _ruled_out(c: CoarseBreak) -> str:
    if not c.measured:
        return c.error
    if c.usable:
        return f"|T| at most {c.peak_db:.0f} dB while another break of the group sees |T| above 0 dB: a minor loop"
    if c.negligible:
        return f"|T| at most {c.peak_db:.0f} dB: T is about 0 there, the break measures nothing"
    return f"|T| still {c.top_db:.0f} dB at {_hz(COARSE_SWEEP.fstop_hz)}: T does not fall, a path around the probe"


def ruled_out_briefly(c: CoarseBreak) -> str:
    """Why a candidate was passed over, in a few words (the text listing)."""
    if not c.measured:
        return "not measured"
    if c.negligible:
        return "T about 0"
    if c.usable:
        return "a minor loop"
    return "T does not fall"


def _structure(c: BreakCandidate, total: int) -> str:
    if not c.split_checked:
        on = "on every loop of the group" if c.opens_all else f"on {len(c.opened)} of {total} loops"
        parts = [f"{on} (loop structure only: the probe's split there was not worked out)"]
        if c.single_driver:
            parts.append(f"driven by {c.drivers[0]} alone")
        return ", ".join(parts)
    if c.opens_all:
        opened = "opens every loop of the group" if total > 1 else "opens the loop"
    else:
        opened = f"opens {len(c.opened)} of {total} loops"
        if c.kept_closed and len(c.kept_closed) == len(c.left_closed):
            opened += f" (the other{'s' if len(c.kept_closed) > 1 else ''}: local compensation kept closed)"
    parts = [opened]
    if c.single_driver:
        parts.append(f"driven by {c.drivers[0]} alone")
    if c.high_impedance_load:
        parts.append("loads only high-impedance inputs")
    return ", ".join(parts)


def why_at(group: LoopGroup, c: BreakCandidate, coarse: CoarseBreak | None) -> str:
    """Why a break: which loops it opens, how it is driven and loaded, and its coarse T."""
    why = _structure(c, len(group.loops))
    return why + (f"; coarse T: {_figures(coarse)}" if coarse is not None else "")


def choose(group: LoopGroup, coarse: Sequence[CoarseBreak], swept: bool = True) -> GroupCensus:
    """The group's break: the best-ranked candidate whose coarse T is usable (see the module docstring), re-ranked first."""
    by = {c.node: c for c in coarse}
    ranked = [c for c in group.candidates if _breakable(c) and not (c.node in by and by[c.node].refused)]
    usable = [c for c in ranked if c.node in by and by[c.node].usable]
    measured = [c for c in ranked if c.node in by and by[c.node].measured and not by[c.node].negligible]
    unknown = [c for c in ranked if c.node not in by or not by[c.node].measured]  # not swept, or its simulation failed
    if any(by[c.node].can_ring for c in usable):  # the group's loop gain exceeds 1 at some break: measure it at such a break
        usable = [c for c in usable if by[c.node].can_ring] + [c for c in usable if not by[c.node].can_ring]
    structural = [c for c in group.candidates if not c.refused]  # without a sweep, unchecked splits are taken as ranked
    pick = (usable or measured or unknown or [None])[0] if swept else (ranked or structural or [None])[0]
    if pick is None:
        tried = "; ".join(f"{c.node} ({_ruled_out(c)})" for c in coarse)
        refused = "; ".join(f"{c.node} ({c.refused or 'the probe split there opens none of its loops'})"
                            for c in group.candidates[:4] if not _breakable(c))
        if coarse and all(c.negligible for c in coarse if not c.refused) and any(not c.refused for c in coarse):
            head = "every break of this group measures T about 0 (an open switch, a dead bias, or a split that leaves the loop closed)"
        else:
            head = "no node of this group can be broken so that T measures one of its loops"
        why = f"{head}: " + "; ".join(x for x in (tried, refused) if x)
        return GroupCensus(group, tuple(coarse), None, why)
    before = [c for c in ranked[: ranked.index(pick)] if c.node in by] if pick in ranked else []
    passed_over = tuple(f"{c.node} ({_ruled_out(by[c.node])})" for c in before)
    briefly = tuple(f"{c.node}: {ruled_out_briefly(by[c.node])}" for c in before)
    why = why_at(group, pick, by.get(pick.node))
    if pick.node in by and by[pick.node].measured and not by[pick.node].falls:
        why += " (no candidate's T falls well below 1 at the top of the sweep)"
    order = [pick] + [c for c in group.candidates if c is not pick]
    regrouped = replace(group, candidates=tuple(replace(c, rank=r) for r, c in enumerate(order, 1)))
    return GroupCensus(regrouped, tuple(coarse), pick.break_name, why, passed_over, briefly)
