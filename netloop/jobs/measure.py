"""The main job, composed once: netlist -> break -> probe deck -> ngspice -> return ratio -> analysis."""

from __future__ import annotations

import contextlib
import logging
import math
import os
import time
import uuid
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, replace
from os import PathLike
from pathlib import Path

import numpy as np

from netloop.analysis import middlebrook, parse_requirements, propose_frequencies, tian
from netloop.analysis.engine import Draft, analyse_draft, finish
from netloop.analysis.nyquist import RESOLVED_MAX_DB
from netloop.analysis.preload import load_scipy_in_background
from netloop.analysis.refine import crossings, propose_around
from netloop.analysis.requirements import Requirement
from netloop.analysis.results import Check, LoopAnalysis
from netloop.errors import NetloopError, ProbeError
from netloop.jobs.kept_probes import KeptProbes, rewritten
from netloop.jobs.loop_result import BreakInfo, LoopResult, SimInfo, caveats_on_error, netlist_notes
from netloop.netlist import Netlist, flat_element_count, parse_file, parse_text, write_netlist
from netloop.jobs.measure_checks import (PZ_MAX_ELEMENTS, Trial, op_check, other_placements, pz_check, second_break_check, settle_split,
                                         op_sources)
from netloop.jobs.splits import LoopStructure
from netloop.probe import ProbedNetlist, ProbeVectors, break_loop, split_loop
from netloop.probe.chain import Chain, chain_probes
from netloop.sim import AcRun, AcSweep, SimJob, SimResult, Simulator, default_simulator, processes_for
from netloop.sim.background import StartingSimulator, run_while
from netloop.sim.pole_zero import node_poles

__all__ = [
    "CLEARS_STATUS",
    "METHODS",
    "Sweep",
    "closed_circuit_pz",
    "inputs_only_doubt",
    "load_netlist",
    "measure",
    "measure_probed",
    "netlist_folder",
    "own_simulator",
    "probe_job",
    "refuse_inputs_only",
    "return_ratio",
    "sample_loops",
    "simulator_processes",
]

METHODS = ("tian", "middlebrook")

_log = logging.getLogger("netloop")  # what is being simulated, for a status line (netloop.cli.status)
CLEARS_STATUS = {"clears_status": True}  # ``extra`` of a record that ends a stage: a status line is cleared


@dataclass(frozen=True, slots=True)
class Sweep:
    """The frequency plan of a measurement.

    The first pass runs ``ac dec points_per_decade fmin_hz fmax_hz``. When a limit was not given by
    the user (``*_given`` False) the sweep is widened where the data asks for it, two decades a round:
    upward until |T| is well below 1 at the top or ``ceiling_hz`` is reached, downward until the
    phase has settled at the bottom, |T| there is beyond what the data resolves (RESOLVED_MAX_DB) or
    ``floor_hz`` is reached. Then, with
    ``refine``, short linear sweeps are added around every crossover until the worst phase margin
    moves by less than ``tol_deg`` (at most ``max_rounds`` rounds).
    """

    fmin_hz: float = 1e-2
    fmax_hz: float = 1e10
    points_per_decade: int = 10
    fmin_given: bool = False
    fmax_given: bool = False
    refine: bool = True
    tol_deg: float = 1e-4
    max_rounds: int = 6
    floor_hz: float = 1e-6  # never widen below this
    ceiling_hz: float = 1e13  # never widen above this

    def __post_init__(self) -> None:
        if not (0 < self.fmin_hz < self.fmax_hz) or not math.isfinite(self.fmax_hz):
            raise NetloopError(f"the sweep needs 0 < fmin < fmax, got fmin={self.fmin_hz:g} Hz, fmax={self.fmax_hz:g} Hz")
        if not (0 < self.floor_hz and math.isfinite(self.ceiling_hz)):
            raise NetloopError(f"the sweep is widened between a floor above 0 and a finite ceiling, got floor={self.floor_hz:g} Hz, "
                               f"ceiling={self.ceiling_hz:g} Hz")
        if self.points_per_decade < 2:
            raise NetloopError(f"points per decade must be at least 2, got {self.points_per_decade}")


def load_netlist(source: Netlist | str | PathLike[str]) -> Netlist:
    """A Netlist from a parsed netlist, a path, or netlist text (text is recognised by a newline)."""
    if isinstance(source, Netlist):
        return source
    if isinstance(source, str) and "\n" in source:
        return parse_text(source)
    return parse_file(Path(source))


def return_ratio(probed: ProbedNetlist | ProbeVectors, series: dict, shunt: dict, method: str) -> np.ndarray:
    """T from the vectors of the two runs of a probe (or of its ProbeVectors), by Tian et al. (2001) or Middlebrook (1975)."""
    q = (probed.vectors if isinstance(probed, ProbedNetlist) else probed).quantities(series, shunt)
    if method == "tian":
        return tian(q.va1, q.vb1, q.ib2)
    if method == "middlebrook":
        return middlebrook(q.va1, q.vb1, q.ia2, q.ib2)
    raise NetloopError(f"unknown method {method!r}; expected one of {', '.join(METHODS)}")


def netlist_folder(netlist: Netlist) -> str | None:
    """The folder ngspice reads the netlist's relative ``.include``/``.lib`` paths from: its file's, links resolved (None for
    netlist text without a file). os.path.realpath, which pathlib's resolve wraps in objects and one more stat: probe_job
    0.13 -> 0.09 ms a sky130 mismatch sample (timed in place while 77 samples ran through the corner worker's run_task,
    medians of 4 runs taken in turns); 28 -> 17 us in a loop of 20,000."""
    source = netlist.source
    return os.path.dirname(os.path.realpath(source)) if source and not source.startswith("<") else None


def probe_job(probed: ProbedNetlist, sweeps: tuple[AcSweep, ...], *, label: str = "", timeout_s: float = 600.0,
              circuit_id: str | None = None) -> SimJob:
    """The simulator job for one probe: two AC runs on one operating point, only the probe vectors saved. ``circuit_id``
    (SimJob.circuit_id; a new one when None) is given to run on the circuit another probe of the same netlist loaded."""
    return SimJob(
        netlist=write_netlist(probed.netlist),
        runs=(
            AcRun("series", probed.series_run_ac, sweeps),
            AcRun("shunt", probed.shunt_run_ac, sweeps),
        ),
        save=probed.saves,
        excitable=probed.excitable,
        label=label,
        timeout_s=timeout_s,
        workdir=netlist_folder(probed.netlist),
        op_voltages=False,  # the first ac's own operating point serves, no separate op run (sample_loops asks for one when checked)
        circuit_id=circuit_id or uuid.uuid4().hex,  # every round of this probe's measurement runs on one loaded circuit
    )


def _lin_sweeps(freqs: np.ndarray, points_per_decade: int) -> tuple[AcSweep, ...]:
    """Short linear ac sweeps that visit (close to) the proposed frequencies, one per cluster."""
    if freqs.size == 0:
        return ()
    freqs = np.sort(freqs)
    gap = 10 ** (1.5 / points_per_decade)
    clusters: list[list[float]] = [[float(freqs[0])]]
    for f in freqs[1:]:
        if f / clusters[-1][-1] < gap:
            clusters[-1].append(float(f))
        else:
            clusters.append([float(f)])
    sweeps = []
    for c in clusters:
        if len(c) == 1:
            sweeps.append(AcSweep("lin", 1, c[0], c[0]))
        else:
            sweeps.append(AcSweep("lin", max(len(c), 3), c[0], c[-1]))
    return tuple(sweeps)


def _merge(f: np.ndarray, t: np.ndarray, f2: np.ndarray, t2: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    ff = np.concatenate([f, f2])
    tt = np.concatenate([t, t2])
    order = np.argsort(ff, kind="stable")
    ff, tt = ff[order], tt[order]
    keep = np.concatenate([[True], np.diff(ff) > ff[1:] * 1e-12])
    return ff[keep], tt[keep]


def _levels_off(f: np.ndarray, t: np.ndarray) -> bool:
    """True when |T| has stopped falling over the top decade of the sweep (it moves by less than 3 dB there): T
    tends to a constant, a path around the probe; widening the sweep would not bring it down (the check
    falls-at-top then says so, netloop.analysis.checks)."""
    i = int(np.searchsorted(f, f[-1] / 10.0))
    if i >= f.size - 1 or abs(t[i]) == 0.0 or abs(t[-1]) == 0.0:
        return False
    return abs(20.0 * math.log10(abs(t[-1]) / abs(t[i]))) < 3.0


def _beyond_resolution(t: np.ndarray) -> bool:
    """True when |T| at the bottom of the sweep is above RESOLVED_MAX_DB: lower samples would be rounding noise."""
    return 20.0 * math.log10(max(abs(t[0]), 1e-300)) > RESOLVED_MAX_DB


def _phase_settled(f: np.ndarray, t: np.ndarray) -> bool:
    """True when the bottom of the sweep is settled: the phase moves by less than 3 deg over the lowest
    decade (common practice) and no unity crossing hides below it, i.e. |T| is not above 1 while falling
    toward DC (an AC-coupled loop, whose phase sits still at +90 deg) nor below 1 while rising toward DC."""
    top = np.searchsorted(f, f[0] * 10.0)
    if top >= f.size:
        return True
    ph = np.unwrap(np.angle(t[: top + 1]))
    if np.ptp(ph) >= math.radians(3.0):
        return False
    bottom, decade_up = abs(t[0]), abs(t[top])
    falls_toward_dc = decade_up > 1.1 * bottom
    rises_toward_dc = bottom > 1.1 * decade_up
    return not ((bottom > 1.0 and falls_toward_dc) or (bottom < 1.0 and rises_toward_dc))


class _Runner:
    """Runs the jobs of one break (any number of AC runs) and turns each result into named return ratios.

    ``job_for(sweeps)`` builds the SimJob; ``ratios(result)`` maps a SimResult to {loop name: T},
    all sampled at the frequencies of the job's first run.
    """

    def __init__(self, job_for: Callable[[tuple[AcSweep, ...]], SimJob], ratios: Callable[[SimResult], Mapping[str, np.ndarray]], simulator: Simulator):
        self.job_for = job_for
        self.ratios = ratios
        self.simulator = simulator
        self.seconds = 0.0
        self.ngspice_seconds = 0.0  # of which ngspice's own (SimResult.ngspice_seconds)
        self.aid: str | None = None
        self.notes: dict[str, None] = {}
        self.deck_path: str | None = None
        self.backend = getattr(simulator, "backend", type(simulator).__name__)
        self.processes = len(getattr(simulator, "simulators", ())) or 1
        self.loads = 0  # jobs for which ngspice read the netlist (SimResult.loaded)
        self.voltages: Mapping[str, float] = {}  # the operating point's node voltages (SimResult.operating_point)

    def evaluate(self, sweeps: tuple[AcSweep, ...], meanwhile: Callable[[], object] | None = None, stage: str = "") -> tuple[np.ndarray, dict[str, np.ndarray]]:
        """Run the job of ``sweeps``; ``meanwhile()`` is called while the simulator works (netloop.sim.background.run_while).
        ``stage`` says what the job is for, in the status log (logger "netloop", level INFO)."""
        job = self.job_for(sweeps)
        processes = f" on {self.processes} ngspice processes" if self.processes > 1 else ""
        _log.info("%ssimulating %s: %d AC run(s)%s", f"{job.label}: " if job.label else "", stage or "a sweep", len(job.runs), processes)
        start = time.perf_counter()
        result = self.simulator.run(job) if meanwhile is None else run_while(self.simulator, job, meanwhile)[0]
        self.seconds += time.perf_counter() - start
        self.ngspice_seconds += result.ngspice_seconds
        self.loads += result.loaded
        self.aid = self.aid or result.convergence_aid
        self.notes.update(dict.fromkeys(result.warnings))  # what ngspice ignored (unrecognized model parameters)
        self.deck_path = self.deck_path or result.deck_path
        self.voltages = self.voltages or result.operating_point  # every round runs on the operating point of the first
        self.backend = result.backend or self.backend
        t = {name: np.asarray(v, dtype=complex) for name, v in self.ratios(result).items()}
        return np.asarray(result.runs[0].freq_hz, dtype=float), t


def _merge_all(f: np.ndarray, t: dict[str, np.ndarray], f2: np.ndarray, t2: dict[str, np.ndarray]) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    merged = {name: _merge(f, t[name], f2, t2[name]) for name in t}
    ff = next(iter(merged.values()))[0] if merged else f
    return ff, {name: m[1] for name, m in merged.items()}


def sample_loops(
    job_for: Callable[[tuple[AcSweep, ...]], SimJob],
    ratios: Callable[[SimResult], Mapping[str, np.ndarray]],
    simulator: Simulator,
    sweep: Sweep,
    open_loop_rhp_poles: Mapping[str, int | None],
    meanwhile: Callable[[], object] | None = None,
    sources: tuple[tuple[str, str, str], ...] | None = None,
) -> tuple[dict[str, LoopAnalysis], SimInfo, dict[str, tuple[str, ...]]]:
    """Sweep, widen and refine the return ratios of one break's jobs, all on the same frequencies.

    ``job_for(sweeps)`` builds the SimJob (any number of AC runs); ``ratios(result)`` maps its
    SimResult to {loop name: T} at the frequencies of the first run. Returns the analysis of each
    loop, the shared SimInfo (``refined`` when every loop settled) and each loop's warnings. With
    one loop this is exactly measure_probed's plan (see Sweep). ``meanwhile()`` is called while the
    first job runs; when it raises, that job is abandoned and its exception raised. ``sources``
    (netloop.jobs.measure_checks.voltage_sources) asks for the check "operating-point" of the
    operating point the jobs ran on (their SimJob.op_voltages is set here), first among each loop's
    checks; a simulator that gives no operating point (the analytic fake) gives no such check.
    """
    if sources is not None:  # the check needs the node voltages of a separate op (ngspice's ac keeps only the saved vectors)
        plain = job_for
        job_for = lambda sweeps: replace(plain(sweeps), op_voltages=True)  # noqa: E731
    runner = _Runner(job_for, ratios, simulator)
    load_scipy_in_background()  # the analysis's scipy modules load while the first simulation runs
    fmin, fmax = sweep.fmin_hz, sweep.fmax_hz
    ppd = sweep.points_per_decade
    f, t = runner.evaluate((AcSweep("dec", ppd, fmin, fmax),), meanwhile, stage="the first sweep")

    # widen the sweep where the data asks for it and the user did not fix the limit, as far as the floor and the ceiling
    while True:
        more: list[AcSweep] = []
        if not sweep.fmax_given and any(abs(v[-1]) > 0.1 and not _levels_off(f, v) for v in t.values()) and fmax < sweep.ceiling_hz:
            new_fmax = min(fmax * 100.0, sweep.ceiling_hz)
            more.append(AcSweep("dec", ppd, fmax, new_fmax))
            fmax = new_fmax
        if (not sweep.fmin_given and not all(_phase_settled(f, v) or _beyond_resolution(v) for v in t.values())
                and fmin > sweep.floor_hz):
            new_fmin = max(fmin / 100.0, sweep.floor_hz)
            more.append(AcSweep("dec", ppd, new_fmin, fmin))
            fmin = new_fmin
        if not more:
            break
        f2, t2 = runner.evaluate(tuple(more), stage="a wider sweep")
        f, t = _merge_all(f, t, f2, t2)

    def draft(name: str) -> Draft:
        """A loop's draft, what a round reads (crossovers, margins, the Nyquist count); the last is finished."""
        return analyse_draft(f, t[name], open_loop_rhp_poles=open_loop_rhp_poles[name])

    # refined: the crossovers, and where the Nyquist count asks for denser samples (NyquistVerdict.coarse_hz). The first
    # round reads only the crossovers of a loop that crosses 0 dB (crossings: the frequencies a draft would propose when
    # its count finds no coarse interval, at a third of the cost); where the count does, the next round's draft says so
    # and refines there. A loop without a gain crossover is drafted whole: only its count can ask for samples.
    first = {name: crossings(f, t[name]) for name in t} if sweep.refine else {}
    drafts = {name: draft(name) for name in t if not (name in first and first[name].gain_crossovers)}
    active = [name for name in first if first[name].gain_crossovers or drafts[name].analysis.nyquist.coarse_hz]
    settled = {name: name not in active for name in t}
    rounds = 0
    if active:
        previous = {name: drafts[name].analysis.margins.phase_margin_deg if name in drafts else first[name].phase_margin_deg
                    for name in active}
        while rounds < sweep.max_rounds:
            proposals = np.concatenate([propose_frequencies(f, t[name], analysis=drafts[name].analysis) if name in drafts
                                        else propose_around(first[name]) for name in active])
            if proposals.size == 0:
                settled.update(dict.fromkeys(active, True))
                break
            f2, t2 = runner.evaluate(_lin_sweeps(proposals, ppd), stage=f"refinement round {rounds + 1}")
            f, t = _merge_all(f, t, f2, t2)
            rounds += 1
            drafts = {name: draft(name) for name in t}
            current = {name: drafts[name].analysis.margins.phase_margin_deg for name in active}
            for name in active:
                p, c = previous[name], current[name]
                same = p is None and c is None if p is None or c is None else abs(c - p) < sweep.tol_deg
                settled[name] = same and not drafts[name].analysis.nyquist.coarse_hz
            if all(settled[name] for name in active):
                break
            previous = current
    _log.info("simulations done", extra=CLEARS_STATUS)  # a status line is cleared
    drafts = {name: drafts.get(name) or draft(name) for name in t}  # without a round, the loops only looked at are drafted now
    # the whole analysis of each loop: its last draft, on the same data, finished
    analyses = {name: finish(d) for name, d in drafts.items()}
    if sources is not None and runner.voltages:  # the check of the operating point, first among the checks
        op = op_check(sources, runner.voltages)
        analyses = {name: replace(a, checks=(op, *a.checks)) for name, a in analyses.items()}
    info = SimInfo(
        backend=runner.backend,
        points=int(f.size),
        refinement_rounds=rounds,
        refined=all(settled.values()),
        convergence_aid=runner.aid,
        deck_path=runner.deck_path,
        seconds=runner.seconds,
        ngspice_seconds=runner.ngspice_seconds,
        processes=runner.processes,
        loads=runner.loads,
    )
    warnings: dict[str, tuple[str, ...]] = {}
    for name, a in analyses.items():
        notes = list(runner.notes)
        if runner.aid:
            notes.append(f"the operating point converged only with {runner.aid}")
        if sweep.refine and a.gain_crossovers and not settled[name]:
            notes.append(f"the phase margin did not settle to {sweep.tol_deg:g} deg in {rounds} refinement rounds")
        warnings[name] = tuple(notes)
    return analyses, info, warnings


def measure_probed(
    probed: ProbedNetlist,
    *,
    method: str = "tian",
    sweep: Sweep = Sweep(),
    simulator: Simulator,
    open_loop_rhp_poles: int | None = None,
    label: str = "",
    timeout_s: float = 600.0,
    meanwhile: Callable[[], object] | None = None,
    circuit_id: str | None = None,
    sources: tuple[tuple[str, str, str], ...] | None = None,
) -> tuple:
    """Simulate one probe and analyse it: returns (analysis, SimInfo, warnings).

    ``meanwhile()`` is called while the first simulation runs (measure checks the loop then); when
    it raises, the simulation is abandoned and its exception raised. ``circuit_id``: probe_job's.
    ``sources``: the netlist's independent voltage sources, for the check "operating-point" (sample_loops).
    """
    if method not in METHODS:
        raise NetloopError(f"unknown method {method!r}; expected one of {', '.join(METHODS)}")

    def ratios(result: SimResult) -> dict[str, np.ndarray]:
        series, shunt = result.run("series"), result.run("shunt")
        return {"loop": return_ratio(probed, dict(series.vectors), dict(shunt.vectors), method)}

    base = probe_job(probed, (), label=label, timeout_s=timeout_s, circuit_id=circuit_id)  # the netlist is written once, not every round

    def job_for(sweeps: tuple[AcSweep, ...]) -> SimJob:
        return replace(base, runs=tuple(replace(run, sweeps=sweeps) for run in base.runs))

    analyses, info, warnings = sample_loops(job_for, ratios, simulator, sweep, {"loop": open_loop_rhp_poles}, meanwhile, sources)
    return analyses["loop"], info, warnings["loop"]


def breaks_of(probed: ProbedNetlist) -> BreakInfo:
    """The plain-data description of a break, for reports."""
    return BreakInfo(
        node=probed.node,
        side_a=probed.side_a,
        side_b=probed.side_b,
        driver_terminals=probed.driver_terminals,
        load_terminals=probed.load_terminals,
        shunt_terminals=probed.shunt_terminals,
        decided_by=probed.decided_by,
        silenced_sources=probed.silenced_sources,
        copied_subcircuits=probed.copied_subcircuits,
        load_readers=probed.load_readers,
    )


def ignored_lines(netlist: Netlist) -> tuple[str, ...]:
    """The statements netloop never runs, as "file:line: text" (first line of a block)."""
    return tuple(f"{d.location.file}:{d.location.line}: {d.text.splitlines()[0].strip()}" for d in netlist.ignored)


def simulator_processes(processes: int | None, netlist: Netlist, runs: int) -> int:
    """``processes`` when given (at least 1), else how many ngspice processes suit a job of ``runs``
    runs on this netlist (netloop.sim.processes_for: more than one only on large circuits)."""
    if processes is not None:
        if processes < 1:
            raise NetloopError(f"the number of ngspice processes must be 1 or more, got {processes}")
        return min(processes, max(runs, 1))
    return processes_for(flat_element_count(netlist), runs)


def own_simulator(processes: int | None, netlist: Netlist, runs: int, keep_decks: str | PathLike[str] | None) -> Simulator:
    """The default simulator for one measurement of ``netlist``, with as many ngspice processes as suit it."""
    return default_simulator(keep_dir=str(keep_decks) if keep_decks else None, processes=simulator_processes(processes, netlist, runs))


def measure(
    netlist: Netlist | str | PathLike[str],
    at: str,
    *,
    driver: str | None = None,
    method: str = "tian",
    sweep: Sweep = Sweep(),
    open_loop_rhp_poles: int | None = None,
    requirements: Iterable[str | Requirement] = (),
    simulator: Simulator | None = None,
    keep_decks: str | PathLike[str] | None = None,
    label: str = "",
    timeout_s: float = 600.0,
    processes: int | None = None,
    placement: Mapping[str, str] | None = None,
    decisions: dict | None = None,
) -> LoopResult:
    """Break the loop at node ``at``, measure its return ratio in ngspice and analyse its stability.

    ``netlist`` is a parsed Netlist, a path, or netlist text. ``requirements`` are expressions
    such as "pm>=60" or parsed Requirement objects. Without ``simulator`` the default ngspice
    backend is started for this call and closed after it, with ``processes`` ngspice processes
    sharing the two runs (None: two on a large netlist when two CPUs are free, else one; see
    netloop.sim.processes_for); ``processes`` is ignored when a simulator is given.
    ``open_loop_rhp_poles`` (P) is read from the data unless given. ``placement`` puts bridging
    elements on a side ({"cc": "driver"}, netloop.probe.break_loop); without it and without
    ``driver`` the split the rules give is checked, and another placement of the bridging elements
    is measured when it fails its checks (netloop.jobs.measure_checks; ``decided_by`` and the
    job check "split" say what was moved and why). ``decisions``: where and how the node is split
    (the probed netlists themselves, rewritten for the next netlist: netloop.jobs.kept_probes)
    and which sources bound the operating point, kept by the caller for netlists that differ from this
    one only in ngspice's seed (the samples of one corner): read when there, else found and added.
    """
    with _simulator_for(simulator, keep_decks) as sim:  # ngspice starts now, while the netlist is read and broken
        parsed = load_netlist(netlist)
        reqs = parse_requirements(requirements)
        if simulator is None:
            sim.use_processes(simulator_processes(processes, parsed, runs=2))
        sources = _decided(decisions, ("op-sources",), lambda: op_sources(parsed))  # whose voltages bound a credible operating point
        options = dict(method=method, sweep=sweep, simulator=sim, open_loop_rhp_poles=open_loop_rhp_poles, label=label, timeout_s=timeout_s,
                       sources=sources)  # (measure_checks.op_check)
        with caveats_on_error(parsed):
            free = driver is None and placement is None
            unchecked, chain, loop_check, checked = _probes(parsed, at, driver, placement, free, decisions)
            circuit = uuid.uuid4().hex
            analysis, info, sim_warnings = measure_probed(chain.first if chain else unchecked, meanwhile=loop_check, circuit_id=circuit, **options)
            probed = checked()  # the loop check's outcome, found while the first simulation ran
            probed, analysis, info, sim_warnings, checks = _checked_split(parsed, at, probed, analysis, info, sim_warnings, options, free,
                                                                          (chain, circuit))
    if probed.inputs_only:
        _refuse_inputs_only(probed, analysis, driver or "", checks)
    outcomes = tuple(r.check(analysis) for r in reqs)
    return LoopResult(
        netlist=parsed.source,
        label=label,
        method=method,
        breaks=breaks_of(probed),
        analysis=analysis,
        requirements=outcomes,
        ignored_statements=ignored_lines(parsed),
        sim=info,
        checks=checks,
        **netlist_notes(parsed, probed.warnings, sim_warnings, analysis.warnings),
    )


def _retold(decided_by: str, placement: Mapping[str, str], detail: str) -> str:
    """The probe's sentence for a split netloop measured again with its bridges moved (or the net under another name),
    told as netloop's doing: the probe says "placed there on request" of every element placed by name, and here netloop,
    not the user, asked; then what netloop moved and why (the check "split")."""
    for name in placement:
        decided_by = decided_by.replace(f"{name} (placed there on request)", f"{name} (moved there by netloop: below)")
    return f"{decided_by[:-1]}; netloop {'moved ' if placement else ''}{detail}."


def _decided(decisions: dict | None, key: tuple, find: Callable[[], object]):
    """``find()``, kept in ``decisions`` (measure's) under ``key`` when they are given: the same for every netlist they serve."""
    if decisions is None:
        return find()
    if key not in decisions:
        decisions[key] = find()
    return decisions[key]


def _probes(parsed: Netlist, at: str, driver: str | None, placement: Mapping[str, str] | None, free: bool, decisions: dict | None) -> tuple:
    """(the split simulated first, the chain it is measured in or None, the loop check to run during the first simulation
    or None, a call that gives the checked split once that has run). With ``decisions`` (measure's), the splits of an
    earlier netlist that differs from this one in ``.option`` lines only (a sample's seed) are rewritten for this one
    (netloop.jobs.kept_probes) instead of found again; the splits found here are kept for the next."""
    key = ("probes", at.strip().lower(), driver, tuple(sorted((placement or {}).items())))
    kept = decisions.get(key) if decisions is not None else None
    reused = rewritten(kept, parsed) if kept is not None else None
    if reused is not None:
        unchecked, checked, chain = reused
        return unchecked, chain, None, lambda: checked
    unchecked, loop_check = split_loop(parsed, at, driver=driver, placement=placement)  # is the node on a loop? asked during the first simulation
    chain = _chain(parsed, at, unchecked) if free else None  # the split tried first when this one is doubted, in the same netlist

    def checked() -> ProbedNetlist:
        probed = loop_check()
        if decisions is not None:
            decisions[key] = KeptProbes(parsed, unchecked, probed, chain)
        return probed

    return unchecked, chain, loop_check, checked


def _chain(parsed: Netlist, at: str, first: ProbedNetlist) -> Chain | None:
    """The first split chained with the other placement tried first when it is doubted (netloop.probe.chain), or None."""
    places = other_placements(first)
    return chain_probes(parsed, at, first, places[0]) if places else None


def _checked_split(parsed: Netlist, at: str, probed: ProbedNetlist, analysis: LoopAnalysis, info: SimInfo, sim_warnings: tuple[str, ...],
                   options: dict, free: bool, chained: tuple[Chain | None, str] = (None, "")
                   ) -> tuple[ProbedNetlist, LoopAnalysis, SimInfo, tuple[str, ...], tuple[Check, ...]]:
    """The measured split, settled: another placement of its bridging elements when it fails its checks, a second
    break when the rules were unsure, ngspice's pz when T has poles of its own (netloop.jobs.measure_checks). ``chained``:
    the chain the first split was measured in and its circuit id; the chain's other split runs on that loaded circuit."""
    chain, circuit = chained
    extra, extra_ngspice, extra_loads = 0.0, 0.0, 0  # the other splits' simulations: their time, ngspice's own of it, the loads they took
    coarse_options = {**options, "sweep": replace(options["sweep"], refine=False)}
    structure: list[LoopStructure | None] = []  # the loop search, done once and only when a split must be judged by it

    def loops() -> LoopStructure | None:
        """The loops through the net (None when the search cannot state them: the measurement stands without this check)."""
        if not structure:
            try:
                structure.append(LoopStructure(parsed, at))
            except NetloopError as exc:
                _log.info("the loops through %s could not be stated: %s", at, exc)
                structure.append(None)
        return structure[0]

    def opens(trial: Trial) -> Trial:
        """The trial with the check "opens-loop" when its T does not regulate: a split that opens no loop measures none."""
        if trial.analysis.regulates or loops() is None:
            return trial
        return replace(trial, opens=loops().opens_check(trial.at or at, trial.placement))

    def names() -> list[str]:
        """The net's deeper name inside the block that drives it, when the split under the name given is doubted."""
        alias = loops().alias(at) if loops() is not None else None
        return [alias] if alias else []

    full: dict[int, tuple[SimInfo, tuple[str, ...]]] = {}  # trials measured in full: id -> (SimInfo, warnings)

    def measure_other(place: Mapping[str, str], name: str | None = None, coarse: bool = False) -> Trial | None:
        """Another split measured: coarse for a second opinion, in full (refined: its Nyquist data must hold) for a
        split that may be reported instead."""
        nonlocal extra, extra_ngspice, extra_loads
        try:
            other = break_loop(parsed, name or at, placement=place)
        except ProbeError:
            return None
        shared = chain is not None and name is None and dict(place) == chain.placement
        measured = chain.other(other) if shared else other
        a, i, w = measure_probed(measured, circuit_id=circuit if shared else None, **(coarse_options if coarse else options))
        extra += i.seconds
        extra_ngspice += i.ngspice_seconds
        extra_loads += i.loads
        trial = opens(Trial(place, other, a, name or ""))
        if not coarse:
            full[id(trial)] = (i, w)
        return trial

    def measure_coarse(place: Mapping[str, str], name: str | None = None) -> Trial | None:
        return measure_other(place, name, coarse=True)

    checks: list[Check] = []
    first = Trial({}, probed, analysis)
    if free:
        first = opens(first)
        chosen, split_check, _ = settle_split(first, measure_other, names)
        if chosen is not None:  # measured in full already; its seconds are in ``extra`` with the other trials'
            analysis, (i, sim_warnings), other = chosen.analysis, full[id(chosen)], chosen.probed
            info = replace(i, seconds=info.seconds, ngspice_seconds=info.ngspice_seconds, loads=info.loads)  # the first split's loads; the chosen one's are in extra_loads
            probed = replace(other, decided_by=_retold(other.decided_by, chosen.placement, split_check.detail))
            if chosen.opens is not None:
                checks.append(chosen.opens)
        elif first.opens is not None:
            checks.append(first.opens)
        if split_check is not None:
            checks.append(split_check)
        elif not first.failed:
            second = second_break_check(first, measure_coarse)
            if second is not None:
                checks.append(second)
    pz = closed_circuit_pz(parsed, analysis, probed.side_b)
    if pz is not None:
        checks.append(pz)
    info = replace(info, seconds=info.seconds + extra, ngspice_seconds=info.ngspice_seconds + extra_ngspice, loads=info.loads + extra_loads)
    return probed, analysis, info, sim_warnings, tuple(checks)


def closed_circuit_pz(parsed: Netlist, analysis: LoopAnalysis, node: str) -> Check | None:
    """The check "closed-loop-pz" when T has right-half-plane poles read from the data and the circuit is small: ngspice's
    own pole analysis of the closed circuit (seen from ``node``) must find Z = N + P of them; None otherwise."""
    n = analysis.nyquist
    if not (n.open_loop_rhp_from == "fit" and n.open_loop_rhp_poles > 0 and flat_element_count(parsed) <= PZ_MAX_ELEMENTS):
        return None
    return pz_check(analysis, node_poles(write_netlist(parsed), node, workdir=netlist_folder(parsed)))


def inputs_only_doubt(analysis: LoopAnalysis, checks: tuple[Check, ...]) -> str:
    """Why a T measured with driver= naming only inputs does not stand ("" when it does): a failed check, no
    regulation, or positive feedback at low frequency (a backwards split)."""
    failed = [c for c in (*analysis.checks, *checks) if not c.passed]
    backwards = not analysis.regulates or float(np.real(analysis.t[0])) < 0.0
    if not failed and not backwards:
        return ""
    return "; ".join(c.detail for c in failed) if failed else (
        f"T never reaches 0 dB (at most {analysis.largest_gain_db:.4g} dB)" if not analysis.regulates
        else "T is negative at low frequency (positive feedback)")


def refuse_inputs_only(probed: ProbedNetlist, driver: str, why: str) -> None:
    """Raise the ProbeError for driver= naming only inputs on a node whose T does not stand (``why``), naming the outputs there."""
    outputs = ", ".join(probed.outputs) or "none found by the rules: name the element that drives the node"
    raise ProbeError(f"driver={driver!r} names only inputs on node {probed.node} (gates, bases or control inputs), and the T it "
                     f"gives fails its checks ({why}); the outputs on the node are: {outputs}; name one of them as the driver")


def _refuse_inputs_only(probed: ProbedNetlist, analysis: LoopAnalysis, driver: str, checks: tuple[Check, ...]) -> None:
    """driver= naming only inputs (a gate, a base, a control input) stands only when the measured T passes every check and
    regulates with negative feedback: else the split is backwards, and netloop says which outputs sit on the node."""
    why = inputs_only_doubt(analysis, checks)
    if why:
        refuse_inputs_only(probed, driver, why)


def with_label(result: LoopResult, label: str) -> LoopResult:
    """The same result under another label (a corner name)."""
    return replace(result, label=label)


def _simulator_for(simulator: Simulator | None, keep_decks: str | PathLike[str] | None):
    """The caller's simulator (left open), or the default one started in the background now and closed at the end."""
    if simulator is not None:
        return contextlib.nullcontext(simulator)
    return StartingSimulator(keep_dir=str(keep_decks) if keep_decks else None)
