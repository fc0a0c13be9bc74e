"""Several break locations in one deck, side by side: one operating point, every probe's T, and why they differ.

Every location is broken in the same netlist (break_loop applied in turn to its own output; each
probe gets a fresh name), so the job has one operating point and two AC runs per location. In a
run only one probe source is excited; every other probe sits at AC 0, a 0 V source (a short) and
a 0 A source (an open), so it leaves the circuit as it was. The sweep is widened and refined for
all locations together (netloop.measure.sample_loops): one SimJob per round.

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
import uuid
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, replace
from os import PathLike
from pathlib import Path
from typing import Literal

import numpy as np

from netloop.analysis import parse_requirements
from netloop.analysis.requirements import Requirement
from netloop.errors import NetloopError, ProbeError
from netloop.graph import FlatCircuit, LoopDiscovery, LoopGroup, Step, find_loops, flatten
from netloop.loop_result import LoopResult, SimInfo
from netloop.measure import METHODS, Sweep, breaks_of, ignored_lines, load_netlist, own_simulator, return_ratio, sample_loops
from netloop.netlist import Netlist, write_netlist
from netloop.probe import ProbedNetlist, break_loop
from netloop.sim import AcRun, AcSweep, SimJob, SimResult, Simulator

__all__ = [
    "DOMINANT_SHARE",
    "POLE_RTOL",
    "T_FLOOR",
    "T_RTOL",
    "Comparison",
    "Difference",
    "PoleCheck",
    "compare",
    "compare_job",
    "dominant_pole",
    "methods_of",
]

T_RTOL = 1e-6  # relative difference of T treated as "the same" (well above ngspice's 1e-12-ish AC precision)
T_FLOOR = 1e-3  # |T| below which T is not compared (-60 dB, common practice for "no longer matters")
# Dominant closed-loop poles from two locations agree within 2 % of |p| (our choice: on the demo
# circuits the AAA fit places the dominant pole within 1e-6 of ngspice's .pz and the locations agree
# to 1e-12; 2 % leaves room for fits that reach the data's noise on harder circuits, and is still far
# below the spacing of distinct poles worth reporting).
POLE_RTOL = 0.02
# A fitted pole shapes 1/(1+T) visibly when its peak weight is at least 1 % of the largest pole's (our choice:
# on the demo circuits a loop's own poles weigh 1 % to 100 %, another loop's seen through coupling about 0.1 %).
DOMINANT_SHARE = 0.01

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


@dataclass(frozen=True, slots=True)
class Comparison:
    """Every location measured in one deck, the differences explained and the closed-loop poles checked."""

    locations: tuple[str, ...]  # as given, lower-case
    methods: tuple[str, ...]  # ("tian",), ("middlebrook",) or both
    results: tuple[LoopResult, ...]  # location-major: (loc1 method1, loc1 method2, loc2 method1, ...)
    differences: tuple[Difference, ...]  # every pair of locations (first method), then Tian against Middlebrook at each
    pole_checks: tuple[PoleCheck, ...]  # every pair of locations on one loop group (first method)
    sim: SimInfo
    notes: tuple[str, ...] = ()

    @property
    def poles_agree(self) -> bool | None:
        """False if any comparable pair disagrees, True if every one agrees, None when none could be compared."""
        known = [c.agree for c in self.pole_checks if c.agree is not None]
        return all(known) if known else None

    @property
    def defects(self) -> tuple[Difference, ...]:
        return tuple(d for d in self.differences if d.kind == "defect")

    @property
    def passed(self) -> bool:
        """Every location stable with every requirement met."""
        return all(r.passed for r in self.results)

    def result(self, location: str, method: str | None = None) -> LoopResult:
        """The result at one location (for one method; the first method by default)."""
        method = method or self.methods[0]
        for r in self.results:
            if r.breaks.node == location.strip().lower() and r.method == method:
                return r
        raise KeyError(f"{location} ({method})")


def methods_of(method: str) -> tuple[str, ...]:
    """"tian" | "middlebrook" | "both" -> the methods to compute."""
    if method == "both":
        return METHODS
    if method not in METHODS:
        raise NetloopError(f"unknown method {method!r}; expected one of {', '.join(METHODS)} or both")
    return (method,)


# -- the one deck -------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class _Probe:
    location: str
    alone: ProbedNetlist  # the break on the original netlist: sides, terminals, warnings
    placed: ProbedNetlist  # the same break in the shared deck: source and vector names there


def _break_all(parsed: Netlist, locations: Sequence[str], drivers: Mapping[str, str]) -> tuple[Netlist, tuple[_Probe, ...]]:
    """Each location broken alone (to decide its sides and refuse the same net twice), then all of them in one deck."""
    alone = [break_loop(parsed, at, driver=drivers.get(at)) for at in locations]
    seen: dict[str, str] = {}
    for at, p in zip(locations, alone):
        if p.side_b in seen:
            raise ProbeError(f"locations {seen[p.side_b]} and {at} are the same node ({p.side_b}); give each node once")
        seen[p.side_b] = at
    current = parsed
    probes = []
    for at, p in zip(locations, alone):
        # the same split as the break alone: the earlier probes must not change how the node is divided
        placed = break_loop(current, at, driver=",".join(p.driver_terminals))
        current = placed.netlist
        probes.append(_Probe(at, p, placed))
    return current, tuple(probes)


def _run_name(index: int, which: str) -> str:
    return f"{index}.{which}"


def compare_job(deck: Netlist, probes: Sequence[ProbedNetlist], sweeps: tuple[AcSweep, ...], *, label: str = "", timeout_s: float = 600.0) -> SimJob:
    """One SimJob for every probe in ``deck``: runs "K.series" and "K.shunt" per probe K (0-based), others at AC 0."""
    runs = []
    for k, p in enumerate(probes):
        runs.append(AcRun(_run_name(k, "series"), dict(p.series_run_ac), sweeps))
        runs.append(AcRun(_run_name(k, "shunt"), dict(p.shunt_run_ac), sweeps))
    source = deck.source
    return SimJob(
        netlist=write_netlist(deck),
        runs=tuple(runs),
        save=tuple(dict.fromkeys(v for p in probes for v in p.vectors.save)),
        excitable=tuple(dict.fromkeys(s for p in probes for s in (p.series_source, p.shunt_source))),
        label=label,
        timeout_s=timeout_s,
        workdir=str(Path(source).resolve().parent) if source and not source.startswith("<") else None,  # as probe_job
        op_voltages=False,  # as probe_job: the first ac's own operating point serves, no separate op run
        circuit_id=uuid.uuid4().hex,  # as probe_job: every round of this comparison runs on one loaded circuit
    )


def _key(location: str, method: str) -> str:
    return f"{location} ({method})"


# -- which loops a break opens -------------------------------------------------------------------

_LINEAR = frozenset("EGFHBRCLV")  # element letters whose every signal path the loop listing shows (no device capacitances)
_PASSIVE = frozenset("RCL")


@dataclass(frozen=True, slots=True)
class _Place:
    """A location in the loop structure: its group, and which of the group's loops its break opens."""

    location: str
    group: LoopGroup | None
    opened: tuple[int, ...]  # 1-based loop numbers within the group
    closed: tuple[int, ...]  # loops through the node that the break leaves closed (both ends on one side)
    near: bool = False  # not on a listed loop, but in a passive network the group's loops cross
    linear: bool = False  # every element on the group's loops is a controlled source or R, L, C


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


def _place(p: ProbedNetlist, found: LoopDiscovery, original: FlatCircuit) -> _Place:
    """Where the loops through the node enter and leave it, read on the flattened probed netlist (a: driver, b: load)."""
    node = p.side_b
    group = next((g for g in found.groups if node in g.nodes), None)
    if group is None:
        group = _group_near(original, node, found) if node in original.nets else None
        return _Place(p.node, group, (), (), near=group is not None, linear=group is not None and _linear(original, group))
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
    return _Place(p.node, group, tuple(opened), tuple(closed), linear=_linear(original, group))


def _loop_names(group: LoopGroup, numbers: Iterable[int]) -> tuple[str, ...]:
    return tuple(f"loop {group.index}.{k}: {group.loops[k - 1].describe(16)}" for k in numbers)


def _listing(group: LoopGroup, numbers: tuple[int, ...]) -> str:
    return ", ".join(f"{group.index}.{k}" for k in numbers) or "none"


def _relative_difference(ta: np.ndarray, tb: np.ndarray) -> float:
    scale = np.maximum(np.abs(ta), np.abs(tb))
    keep = scale >= T_FLOOR
    if not np.any(keep):
        return 0.0
    return float(np.max(np.abs(ta[keep] - tb[keep]) / scale[keep]))


def _explain(a: _Place, b: _Place, method: str, rel: float) -> Difference:
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
            bypass = tuple(k for k in only if k not in other.closed)
            if kept:
                one = len(kept) == 1
                parts.append(f"{x.location} opens loop{'' if one else 's'} {_listing(g, kept)} which {other.location} leaves closed "
                             f"({'it enters' if one else 'each enters'} and leaves {other.location} on one side of its break)")
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


def _method_difference(location: str, tt: np.ndarray, tm: np.ndarray) -> Difference:
    """Tian's and Middlebrook's T at one location: with this probe (v_a1 = v_b1 - 1, i_a2 = i_b2 - 1) both
    formulas reduce to T = (1 - v_b1 - i_b2) / (v_b1 + i_b2), so anything beyond rounding is a defect."""
    rel = _relative_difference(tt, tm)
    if rel <= T_RTOL:
        text = (f"Tian's and Middlebrook's T agree at {location} (max relative difference {rel:.2g}), as they must: with the same two "
                "runs of this probe both formulas reduce to T = (1 - v_b1 - i_b2) / (v_b1 + i_b2)")
        return Difference((location, location), "tian/middlebrook", "same", rel, text)
    text = (f"DEFECT: at {location} Middlebrook's T differs from Tian's (max relative difference {rel:.2g} > {T_RTOL:g}), although "
            "with the same two runs both formulas reduce to T = (1 - v_b1 - i_b2) / (v_b1 + i_b2)")
    return Difference((location, location), "tian/middlebrook", "defect", rel, text)


# -- closed-loop poles ---------------------------------------------------------------------------


def dominant_pole(result: LoopResult) -> complex | None:
    """The least-damped closed-loop pole among those that visibly shape 1/(1+T) (upper member of a pair), or None.

    Each fitted pole's weight is the peak its term reaches on the jw axis, |r| / |Re p|, with the
    residues r from a linear least-squares fit of S = 1/(1+T) = c + sum r_k / (s - p_k) over the
    data at the fitted poles. Poles below ``DOMINANT_SHARE`` of the largest weight only show
    faintly (another loop's, seen through weak coupling) and are passed over; among the rest the
    one with the smallest damping -Re p / |p| is taken (ties: the slower one).
    """
    poles = result.analysis.poles
    if poles is None or not poles.poles_rad_s:
        return None
    p = np.asarray(poles.poles_rad_s, dtype=complex)
    f = np.asarray(result.analysis.freq_hz, dtype=float)
    t = np.asarray(result.analysis.t, dtype=complex)
    s = 2j * math.pi * f
    with np.errstate(divide="ignore", invalid="ignore"):
        sens = 1.0 / (1.0 + t)
        basis = np.column_stack([np.ones_like(s), *(1.0 / (s - pk) for pk in p)])
    good = np.all(np.isfinite(basis), axis=1) & np.isfinite(sens)
    if np.count_nonzero(good) <= p.size:
        return None
    coef = np.linalg.lstsq(basis[good], sens[good], rcond=None)[0]
    weight = np.abs(coef[1:]) / np.maximum(np.abs(p.real), 1e-12 * np.abs(p))
    keep = (p.imag >= -1e-9 * np.abs(p)) & (weight >= DOMINANT_SHARE * np.max(weight))
    if not np.any(keep):
        return None
    return complex(min(p[keep], key=lambda q: (-q.real / abs(q), -q.real)))


def _near(p: complex, poles: Iterable[complex]) -> bool:
    return any(abs(p - q) <= POLE_RTOL * abs(p) for q in poles)


def _pole_check(ra: LoopResult, rb: LoopResult, method: str) -> PoleCheck:
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


def compare(
    netlist: Netlist | str | PathLike[str],
    at: Sequence[str],
    *,
    drivers: Mapping[str, str] | None = None,
    method: str = "tian",
    sweep: Sweep = Sweep(),
    open_loop_rhp_poles: int = 0,
    requirements: Iterable[str | Requirement] = (),
    simulator: Simulator | None = None,
    keep_decks: str | PathLike[str] | None = None,
    timeout_s: float = 600.0,
    processes: int | None = None,
) -> Comparison:
    """Break the loop at every node of ``at`` in one deck, measure T at each and explain how they differ.

    Takes the options of ``measure`` (``method`` may also be "both"; ``processes`` share the
    runs of every location); ``drivers`` maps a location
    to its driver spec (``driver=`` of measure). Each result is labelled with its location (and
    the method when both are computed). Raises ProbeError for fewer than two locations, a node
    given twice, or a node that cannot be broken.
    """
    methods = methods_of(method)
    locations = tuple(a.strip().lower() for a in at)
    if len(locations) < 2:
        raise ProbeError(f"compare needs at least two locations, got {len(locations)}")
    if len(set(locations)) != len(locations):
        twice = sorted({x for x in locations if locations.count(x) > 1})
        raise ProbeError(f"location {', '.join(twice)} given more than once")
    drivers = {k.strip().lower(): v for k, v in (drivers or {}).items()}
    unknown = set(drivers) - set(locations)
    if unknown:
        raise ProbeError(f"drivers given for {', '.join(sorted(unknown))}, which are not among the locations")
    parsed = load_netlist(netlist)
    reqs = parse_requirements(requirements)
    deck, probes = _break_all(parsed, locations, drivers)
    placed = tuple(p.placed for p in probes)

    def ratios(result: SimResult) -> dict[str, np.ndarray]:
        out = {}
        for k, p in enumerate(probes):
            series = dict(result.run(_run_name(k, "series")).vectors)
            shunt = dict(result.run(_run_name(k, "shunt")).vectors)
            for m in methods:
                out[_key(p.location, m)] = return_ratio(p.placed, series, shunt, m)
        return out

    own = simulator is None
    sim = own_simulator(processes, parsed, 2 * len(probes), keep_decks) if own else simulator
    base = compare_job(deck, placed, (), label="compare", timeout_s=timeout_s)  # written once: every round shares its circuit_id

    def job_for(sweeps: tuple[AcSweep, ...]) -> SimJob:
        return replace(base, runs=tuple(replace(run, sweeps=sweeps) for run in base.runs))

    try:
        names = [_key(p.location, m) for p in probes for m in methods]
        analyses, info, sim_warnings = sample_loops(job_for, ratios, sim, sweep, dict.fromkeys(names, open_loop_rhp_poles))
    finally:
        if own and hasattr(sim, "close"):
            sim.close()

    results = []
    for p in probes:
        for m in methods:
            a = analyses[_key(p.location, m)]
            warnings = (*parsed.warnings, *p.alone.warnings, *sim_warnings[_key(p.location, m)], *a.warnings)
            results.append(LoopResult(
                netlist=parsed.source,
                label=_key(p.location, m) if len(methods) > 1 else p.location,
                method=m,
                breaks=breaks_of(p.alone),
                analysis=a,
                requirements=tuple(r.check(a) for r in reqs),
                ignored_statements=ignored_lines(parsed),
                warnings=tuple(dict.fromkeys(warnings)),
                sim=info,
            ))
    by_key = {(r.breaks.node, r.method): r for r in results}

    original = flatten(parsed)
    found = find_loops(original)
    places = [_place(p.alone, found, original) for p in probes]
    differences: list[Difference] = []
    checks: list[PoleCheck] = []
    m = methods[0]  # with both methods their T are the same (checked below), so location pairs are explained once
    for i in range(len(places)):
        for j in range(i + 1, len(places)):
            a, b = places[i], places[j]
            ra, rb = by_key[(a.location, m)], by_key[(b.location, m)]
            rel = _relative_difference(np.asarray(ra.analysis.t), np.asarray(rb.analysis.t))
            differences.append(_explain(a, b, m, rel))
            if a.group is not None and b.group is not None and a.group.index == b.group.index:
                checks.append(_pole_check(ra, rb, m))
    if len(methods) > 1:
        for p in probes:
            differences.append(_method_difference(
                p.location, np.asarray(by_key[(p.location, "tian")].analysis.t), np.asarray(by_key[(p.location, "middlebrook")].analysis.t)
            ))
    return Comparison(locations, methods, tuple(results), tuple(differences), tuple(checks), info, tuple(found.notes))
