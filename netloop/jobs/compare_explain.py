"""Why two breaks of one circuit give different T, and whether they see the same closed-loop poles.

Why two locations give different T. For a break at node n, 1 + T_n = D / D_n, where D is the
circuit's characteristic determinant (its zeros are the closed-loop poles) and D_n the one of the
circuit opened at n. So:

* the closed-loop poles belong to the circuit, not to the probe: every location on one loop group
  must find the same ones (``poles_agree``: the dominant pole of each, see dominant_pole, must be among
  the other's fitted poles within POLE_RTOL);
* T itself depends on which loops the break opens and on the loading at the break. A loop through
  n is opened when the signal enters n from the driver side and leaves it from the load side; a
  loop that enters and leaves on the same side (a Miller capacitor that rides with the driver of
  the output) stays closed and is part of T. The loops are those of netloop.graph.find_loops.
* Two breaks that open the same, single loop of their group, made of controlled sources and R, L,
  C only (so the listing shows every signal path), must give the same T to numerical precision:
  D_n is then D with that loop's gain set to zero, the same for both. A relative difference above
  ``T_RTOL`` there is reported as a defect. With transistors, their own capacitances close loops
  the listing does not show, and a difference between breaks that open the same listed loops is
  put down to those ("loading").

T is compared where max(|T_a|, |T_b|) >= ``T_FLOOR`` (our choice, common practice: below -60 dB
the loop no longer affects stability and the relative difference is only the simulator's noise).
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Literal

import numpy as np

from netloop.analysis.poles import DOMINANT_SHARE
from netloop.analysis.poles import dominant_pole as analysis_dominant_pole
from netloop.errors import NetloopError
from netloop.graph import FlatCircuit, LoopDiscovery, LoopGroup, Step, flatten
from netloop.jobs.loop_result import LoopResult
from netloop.probe import ProbedNetlist

__all__ = [
    "DOMINANT_SHARE",
    "POLE_RTOL",
    "T_FLOOR",
    "T_RTOL",
    "Difference",
    "Place",
    "PoleCheck",
    "dominant_pole",
    "explain",
    "method_difference",
    "place",
    "pole_check",
    "relative_difference",
]

T_RTOL = 1e-6  # relative difference of T treated as "the same" (well above ngspice's 1e-12-ish AC precision)
T_FLOOR = 1e-3  # |T| below which T is not compared (-60 dB, common practice for "no longer matters")
# Dominant closed-loop poles from two locations agree within 2 % of |p| (our choice: on the demo
# circuits the AAA fit places the dominant pole within 1e-6 of ngspice's .pz and the locations agree
# to 1e-12; 2 % leaves room for fits that reach the data's noise on harder circuits, and is still far
# below the spacing of distinct poles worth reporting).
POLE_RTOL = 0.02

Kind = Literal["same", "defect", "loading", "different loops opened", "different loop groups", "not on a listed loop"]


@dataclass(frozen=True, slots=True)
class Difference:
    """How T at two locations (or by two methods at one location) compares, and why.

    kind: "same" (T agrees to T_RTOL), "defect" (should agree and does not), "loading" (the same
    listed loops opened; the breaks differ on paths the listing does not show as loops: transistor
    capacitances, two-way passive paths), "different loops opened", "different loop groups",
    "not on a listed loop". Tian against Middlebrook at one location is "same" or "defect": with this
    probe both formulas reduce to the same expression.
    loops: the loops the explanation names, each as netloop.graph.Loop.describe() writes it.
    """

    locations: tuple[str, str]
    method: str  # "tian", "middlebrook", or "tian/middlebrook" for the two methods at one location
    kind: Kind
    max_relative_difference: float  # max |T_a - T_b| / max(|T_a|, |T_b|) where |T| >= T_FLOOR; 0.0 if no such point
    explanation: str
    loops: tuple[str, ...] = ()

    @property
    def differs(self) -> bool:
        """True when T differs by more than T_RTOL."""
        return self.max_relative_difference > T_RTOL


@dataclass(frozen=True, slots=True)
class PoleCheck:
    """The dominant closed-loop pole seen from two locations on one loop group (rad/s)."""

    locations: tuple[str, str]
    method: str
    pole_a_rad_s: complex | None  # None when that location has no pole fit
    pole_b_rad_s: complex | None
    agree: bool | None  # None when one side has no fitted pole to compare
    explanation: str


# -- which loops a break opens -------------------------------------------------------------------

_LINEAR = frozenset("EGFHBRCLV")  # element letters whose every signal path the loop listing shows (no device capacitances)
_PASSIVE = frozenset("RCL")


@dataclass(frozen=True, slots=True)
class Place:
    """A location in the loop structure: its group, and which of the group's loops its break opens."""

    location: str
    group: LoopGroup | None
    opened: tuple[int, ...]  # 1-based loop numbers within the group
    closed: tuple[int, ...]  # loops through the node that the break leaves closed (both ends on one side)
    near: bool = False  # not on a listed loop, but in a passive network the group's loops cross
    linear: bool = False  # every element on the group's loops is a controlled source or R, L, C
    inside: tuple[int, ...] = ()  # loops that pass the node inside a step (looked through: a mirror's input, a pair's tail)


def _group_near(flat: FlatCircuit, node: str, found: LoopDiscovery) -> LoopGroup | None:
    """The first group with a node reached from ``node`` through R, L and C only (not through ground)."""
    seen, todo = {node}, [node]
    while todo:
        n = todo.pop()
        group = next((g for g in found.groups if n in g.nodes), None)
        if group is not None:
            return group
        for t in flat.terminals(n):
            fe = flat.elements[t.index]
            if fe.kind in _PASSIVE:
                for m in fe.nodes:
                    if m not in seen and not flat.is_ground(m):
                        seen.add(m)
                        todo.append(m)
    return None


def _linear(flat: FlatCircuit, group: LoopGroup) -> bool:
    names = {e for lp in group.loops for e in lp.elements}
    kinds = set()
    for name in names:
        try:
            kinds.add(flat.element(name).kind)
        except (KeyError, NetloopError):
            return False
    return kinds <= _LINEAR


def _side(flat: FlatCircuit, step: Step, pin_slot: int, sides: Mapping[str, str]) -> str | None:
    """Which side of the split ("driver" or "load") the step's element sits on at the broken node, in the probed circuit."""
    for k, name in enumerate(step.elements):
        try:
            fe = flat.element(name)
        except (KeyError, NetloopError):
            continue
        if not step.passive and k == 0 and step.pins[pin_slot] in fe.pins:
            node = fe.nodes[fe.pins.index(step.pins[pin_slot])]
            if node in sides:
                return sides[node]
        hits = {sides[n] for n in fe.nodes if n in sides}
        if len(hits) == 1:
            return hits.pop()
    return None


def place(p: ProbedNetlist, found: LoopDiscovery, original: FlatCircuit) -> Place:
    """Where the loops through the node enter and leave it, read on the flattened probed netlist (a: driver, b: load)."""
    node = p.side_b
    group = next((g for g in found.groups if node in g.nodes), None)
    if group is None:
        group = _group_near(original, node, found) if node in original.nets else None
        return Place(p.node, group, (), (), near=group is not None, linear=group is not None and _linear(original, group))
    if node in group.looked_through:
        inside = tuple(k for k, lp in enumerate(group.loops, 1) if any(node in s.through for s in lp.steps))
        return Place(p.node, group, (), (), linear=_linear(original, group), inside=inside)
    opened, closed = [], []
    flat = flatten(p.netlist)
    sides = {p.side_a: "driver", p.side_b: "load"}
    for k, lp in enumerate(group.loops, 1):
        into = next((st for st in lp.steps if st.target == node), None)
        out = next((st for st in lp.steps if st.source == node), None)
        if into is None or out is None:
            continue
        a, b = _side(flat, into, 1, sides), _side(flat, out, 0, sides)
        if a is None or b is None:
            continue
        (opened if a != b else closed).append(k)
    return Place(p.node, group, tuple(opened), tuple(closed), linear=_linear(original, group))


def _loop_names(group: LoopGroup, numbers: Iterable[int]) -> tuple[str, ...]:
    return tuple(f"loop {group.index}.{k}: {group.loops[k - 1].describe(16)}" for k in numbers)


def _listing(group: LoopGroup, numbers: tuple[int, ...]) -> str:
    return ", ".join(f"{group.index}.{k}" for k in numbers) or "none"


def relative_difference(ta: np.ndarray, tb: np.ndarray) -> float:
    scale = np.maximum(np.abs(ta), np.abs(tb))
    keep = scale >= T_FLOOR
    if not np.any(keep):
        return 0.0
    return float(np.max(np.abs(ta[keep] - tb[keep]) / scale[keep]))


def explain(a: Place, b: Place, method: str, rel: float) -> Difference:
    pair = (a.location, b.location)
    size = f"max relative difference of T {rel:.2g}"
    if a.group is None or b.group is None:
        missing = ", ".join(x.location for x in (a, b) if x.group is None)
        kind: Kind = "same" if rel <= T_RTOL else "not on a listed loop"
        return Difference(pair, method, kind, rel, f"{missing} is on no loop the loop discovery lists, nor in a passive network such a "
                          f"loop crosses (no signal path returns to it through active elements); {size}")
    if a.group.index != b.group.index:
        ga, gb = a.group, b.group
        return Difference(
            pair, method, "different loop groups" if rel > T_RTOL else "same", rel,
            f"{a.location} is on {ga.label} (nodes {', '.join(ga.nodes)}) and {b.location} on {gb.label} (nodes {', '.join(gb.nodes)}): "
            f"they measure different loops, so their T are unrelated and so are their closed-loop poles; {size}",
            (*_loop_names(ga, a.opened[:1]), *_loop_names(gb, b.opened[:1])),
        )
    g = a.group
    if set(a.opened) != set(b.opened):
        only_a = tuple(k for k in a.opened if k not in b.opened)
        only_b = tuple(k for k in b.opened if k not in a.opened)
        parts = []
        for x, only, other in ((a, only_a, b), (b, only_b, a)):
            kept = tuple(k for k in only if k in other.closed)
            within = tuple(k for k in only if k in other.inside)
            bypass = tuple(k for k in only if k not in other.closed and k not in other.inside)
            if kept:
                one = len(kept) == 1
                parts.append(f"{x.location} opens loop{'' if one else 's'} {_listing(g, kept)} which {other.location} leaves closed "
                             f"({'it enters' if one else 'each enters'} and leaves {other.location} on one side of its break)")
            if within:
                one = len(within) == 1
                parts.append(f"{x.location} opens loop{'' if one else 's'} {_listing(g, within)}, which {'passes' if one else 'pass'} "
                             f"{other.location} inside a stage ({other.location} is looked through, a current mirror's input or a pair's "
                             "tail: a break there opens only the routes through it)")
            if bypass:
                one = len(bypass) == 1
                parts.append(f"{x.location} opens loop{'' if one else 's'} {_listing(g, bypass)} which "
                             f"{'bypasses' if one else 'bypass'} {other.location}")
        named = _loop_names(g, (*only_a, *only_b))
        for x in (a, b):
            if x.near:
                parts.append(f"{x.location} lies in a passive network the loops of {g.label} cross, on a path they do not take")
        text = (f"both belong to {g.label}, but the breaks open different loops: {'; '.join(parts)}; a loop left closed is part of T, "
                f"so T differs while the closed-loop poles must agree; {size}. " + "; ".join(named))
        return Difference(pair, method, "different loops opened" if rel > T_RTOL else "same", rel, text, named)
    opened = _listing(g, a.opened)
    both_closed = tuple(k for k in a.closed if k in b.closed)
    if both_closed:
        opened += f"; both leave {_listing(g, both_closed)} closed, a part of T at both"
    if rel <= T_RTOL:
        return Difference(pair, method, "same", rel, f"both open the same loops of {g.label} ({opened}); T agrees ({size})")
    if len(g.loops) == 1 and a.opened == (1,) and a.linear and not (a.near or b.near):
        return Difference(
            pair, method, "defect", rel,
            f"DEFECT: both breaks open the single loop of {g.label}, made of controlled sources and R, L, C only, so T must be "
            f"identical, but it differs ({size} > {T_RTOL:g}): the probe or the simulation is wrong",
            _loop_names(g, a.opened),
        )
    if not a.linear:
        why = ("its transistors' own capacitances (gate-drain, gate-source) and the two-way passive paths close loops the signal-flow "
               "listing does not show, and the two breaks open different ones of them")
    else:
        why = "the passive networks carry signal both ways, so the breaks leave different paths between the listed loops closed"
    return Difference(
        pair, method, "loading", rel,
        f"both open the same listed loops of {g.label} ({opened}), but {why}: 1 + T_n = D/D_n with D_n the circuit opened at n, so T "
        f"depends on where the circuit is opened while the closed-loop poles (the zeros of D) do not; {size}",
        _loop_names(g, a.opened),
    )


def method_difference(location: str, tt: np.ndarray, tm: np.ndarray) -> Difference:
    """Tian's and Middlebrook's T at one location: with this probe (v_a1 = v_b1 - 1, i_a2 = i_b2 - 1) both
    formulas reduce to T = (1 - v_b1 - i_b2) / (v_b1 + i_b2), so anything beyond rounding is a defect."""
    rel = relative_difference(tt, tm)
    if rel <= T_RTOL:
        text = (f"Tian's and Middlebrook's T agree at {location} (max relative difference {rel:.2g}), as they must: with the same two "
                "runs of this probe both formulas reduce to T = (1 - v_b1 - i_b2) / (v_b1 + i_b2)")
        return Difference((location, location), "tian/middlebrook", "same", rel, text)
    text = (f"DEFECT: at {location} Middlebrook's T differs from Tian's (max relative difference {rel:.2g} > {T_RTOL:g}), although "
            "with the same two runs both formulas reduce to T = (1 - v_b1 - i_b2) / (v_b1 + i_b2)")
    return Difference((location, location), "tian/middlebrook", "defect", rel, text)


# -- closed-loop poles ---------------------------------------------------------------------------


def dominant_pole(result: LoopResult) -> complex | None:
    """The dominant closed-loop pole of a measured loop (netloop.analysis.poles.dominant_pole, the one definition that
    check reports too), or None when no poles were fitted."""
    poles = result.analysis.poles
    if poles is None:
        return None
    return analysis_dominant_pole(result.analysis.freq_hz, result.analysis.t, poles.poles_rad_s)

def _near(p: complex, poles: Iterable[complex]) -> bool:
    return any(abs(p - q) <= POLE_RTOL * abs(p) for q in poles)


def pole_check(ra: LoopResult, rb: LoopResult, method: str) -> PoleCheck:
    pa, pb = dominant_pole(ra), dominant_pole(rb)
    pair = (ra.breaks.node, rb.breaks.node)
    if pa is None or pb is None:
        missing = ", ".join(r.breaks.node for r, p in ((ra, pa), (rb, pb)) if p is None)
        return PoleCheck(pair, method, pa, pb, None, f"no fitted closed-loop pole at {missing}: not compared")
    all_a, all_b = ra.analysis.poles.poles_rad_s, rb.analysis.poles.poles_rad_s
    ok = _near(pa, all_b) and _near(pb, all_a)

    def show(p: complex) -> str:
        return f"{abs(p) / (2 * math.pi):.4g} Hz (damping {-p.real / abs(p):.3g})" if abs(p) > 0 else "0"

    if ok:
        text = f"the dominant closed-loop pole agrees: {show(pa)} at {pair[0]}, {show(pb)} at {pair[1]} (within {POLE_RTOL:.0%})"
    else:
        text = (f"the dominant closed-loop pole DISAGREES: {show(pa)} at {pair[0]} against {show(pb)} at {pair[1]} (tolerance "
                f"{POLE_RTOL:.0%}); the poles belong to the circuit, so one of the fits (or a probe) is wrong: look at their fit errors "
                f"({ra.analysis.poles.fit_error:.2g}, {rb.analysis.poles.fit_error:.2g})")
    return PoleCheck(pair, method, pa, pb, ok, text)


# -- the composition -----------------------------------------------------------------------------
