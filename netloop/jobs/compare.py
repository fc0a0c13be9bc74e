"""Several break locations in one deck, side by side: one operating point, every probe's T, and why they differ.

Every location is broken in the same netlist (break_loop applied in turn to its own output; each
probe gets a fresh name), so the job has one operating point and two AC runs per location. In a
run only one probe source is excited; every other probe sits at AC 0, a 0 V source (a short) and
a 0 A source (an open), so it leaves the circuit as it was. The sweep is widened and refined for
all locations together (netloop.jobs.measure.sample_loops): one SimJob per round.

Why the locations differ is worked out in netloop/jobs/compare_explain.py.
"""

from __future__ import annotations

import uuid
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, replace
from os import PathLike

import numpy as np

from netloop.analysis import parse_requirements
from netloop.analysis.requirements import Requirement
from netloop.errors import NetloopError, ProbeError
from netloop.jobs.compare_explain import (
    DOMINANT_SHARE,
    POLE_RTOL,
    T_FLOOR,
    T_RTOL,
    Difference,
    PoleCheck,
    dominant_pole,
    explain,
    method_difference,
    place,
    pole_check,
    relative_difference,
)
from netloop.graph import find_loops, flatten
from netloop.jobs.loop_result import LoopResult, SimInfo, Verdict, combined_verdict, netlist_notes, raise_placed
from netloop.jobs.measure import (METHODS, Sweep, breaks_of, ignored_lines, load_netlist, netlist_folder, own_simulator, return_ratio,
                                  sample_loops)
from netloop.jobs.measure_checks import op_sources
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
        """Every location passes (its self-checks, stable, every requirement met)."""
        return self.verdict == "pass"

    @property
    def verdict(self) -> Verdict:
        """The locations' verdicts combined (netloop.jobs.loop_result.combined_verdict)."""
        return combined_verdict(r.verdict for r in self.results)

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
    return SimJob(
        netlist=write_netlist(deck),
        runs=tuple(runs),
        save=tuple(dict.fromkeys(v for p in probes for v in p.vectors.save)),
        excitable=tuple(dict.fromkeys(s for p in probes for s in (p.series_source, p.shunt_source))),
        label=label,
        timeout_s=timeout_s,
        workdir=netlist_folder(deck),
        op_voltages=False,  # as probe_job: the first ac's own operating point serves (sample_loops asks for an op when checked)
        circuit_id=uuid.uuid4().hex,  # as probe_job: every round of this comparison runs on one loaded circuit
    )


def _key(location: str, method: str) -> str:
    return f"{location} ({method})"


def compare(
    netlist: Netlist | str | PathLike[str],
    at: Sequence[str],
    *,
    drivers: Mapping[str, str] | None = None,
    method: str = "tian",
    sweep: Sweep = Sweep(),
    open_loop_rhp_poles: int | None = None,
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
    sources = op_sources(parsed)
    base = compare_job(deck, placed, (), label="compare", timeout_s=timeout_s)  # written once: every round shares its circuit_id

    def job_for(sweeps: tuple[AcSweep, ...]) -> SimJob:
        return replace(base, runs=tuple(replace(run, sweeps=sweeps) for run in base.runs))

    try:
        names = [_key(p.location, m) for p in probes for m in methods]
        analyses, info, sim_warnings = sample_loops(job_for, ratios, sim, sweep, dict.fromkeys(names, open_loop_rhp_poles),
                                                    sources=sources)
    except NetloopError as exc:
        raise_placed(exc, parsed)  # ngspice's complaint about a card, at that card's file:line
    finally:
        if own and hasattr(sim, "close"):
            sim.close()

    results = []
    for p in probes:
        for m in methods:
            a = analyses[_key(p.location, m)]
            results.append(LoopResult(
                netlist=parsed.source,
                label=_key(p.location, m) if len(methods) > 1 else p.location,
                method=m,
                breaks=breaks_of(p.alone),
                analysis=a,
                requirements=tuple(r.check(a) for r in reqs),
                ignored_statements=ignored_lines(parsed),
                sim=info,
                **netlist_notes(parsed, p.alone.warnings, sim_warnings[_key(p.location, m)], a.warnings),
            ))
    by_key = {(r.breaks.node, r.method): r for r in results}

    original = flatten(parsed)
    found = find_loops(original)
    places = [place(p.alone, found, original) for p in probes]
    differences: list[Difference] = []
    checks: list[PoleCheck] = []
    m = methods[0]  # with both methods their T are the same (checked below), so location pairs are explained once
    for i in range(len(places)):
        for j in range(i + 1, len(places)):
            a, b = places[i], places[j]
            ra, rb = by_key[(a.location, m)], by_key[(b.location, m)]
            rel = relative_difference(np.asarray(ra.analysis.t), np.asarray(rb.analysis.t))
            differences.append(explain(a, b, m, rel))
            if a.group is not None and b.group is not None and a.group.index == b.group.index:
                checks.append(pole_check(ra, rb, m))
    if len(methods) > 1:
        for p in probes:
            differences.append(method_difference(
                p.location, np.asarray(by_key[(p.location, "tian")].analysis.t), np.asarray(by_key[(p.location, "middlebrook")].analysis.t)
            ))
    return Comparison(locations, methods, tuple(results), tuple(differences), tuple(checks), info, tuple(found.notes))
