"""Run a statistical plan's samples on Dask as corner tasks (journalled, resumable), and rerun one sample alone."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from netloop.errors import NetloopError
from netloop.jobs.corners.apply import apply_settings
from netloop.jobs.corners.journal import read_records
from netloop.jobs.corners.plan import AUTO
from netloop.jobs.corners.runner import CornerRun, run_tasks
from netloop.jobs.loop_result import LoopResult
from netloop.jobs.statistics.plan import SamplePlan
from netloop.jobs.statistics.samples import SEPARATOR, checked_samples, sample_tasks
from netloop.jobs.statistics.summary import YieldStatistics, statistics_part, summarise

__all__ = ["SAMPLE_CHUNK", "SampleRun", "rerun_sample", "run_samples"]

# Samples a Dask task runs at most (netloop.jobs.corners.runner.chunk_size): a sample takes about 0.13 s on the sky130 Miller
# buffer, and Dask's own cost of a task, about 2 ms of CPU in the worker and 2 ms in the calling process (measured with
# trivial tasks on the development machine), and the worker's pause between two tasks, about 2 ms (the 1-worker run of
# benchmarks/yield_speed.py, timed around each task), would otherwise weigh in netloop's share of it, about 15 ms.
SAMPLE_CHUNK = 8


@dataclass(frozen=True, slots=True)
class SampleRun:
    """A statistical plan run: its records and bookkeeping (as a corner run's), and the statistics they show."""

    plan: SamplePlan
    run: CornerRun  # records in plan order (corner by corner, samples in seed order), as the statistics read them
    # (statistics_part: without T); results file, ran, skipped
    statistics: YieldStatistics

    def whole_records(self) -> tuple[dict, ...]:
        """The run's records whole (T and the whole loop document), read back from its results file, in the order of
        ``run.records``."""
        written, _ = read_records(self.run.results_path)
        whole = {(r.get("key"), r.get("at")): r for r in written if r.get("record") == "corner"}  # a task's later record wins
        return tuple(whole[(r["key"], r["at"])] for r in self.run.records)

    @property
    def verdict(self) -> str:
        """The statistics' verdict (YieldStatistics.verdict)."""
        return self.statistics.verdict

    @property
    def passed(self) -> bool:
        return self.verdict == "pass"


def run_samples(splan: SamplePlan, *, workers: int | None = None, cluster: str | None = None, out: str | Path | None = None,
                resume: bool = False, force: bool = False, progress: bool = False, target: float | None = None,
                confidence: float | None = None) -> SampleRun:
    """Measure every sample at every corner of the plan (those not yet in the results file), then the statistics.

    Each sample is a corner task with its seed (netloop.jobs.statistics.samples) run as corner runs are
    (netloop.jobs.corners.run_tasks): on Dask workers with their own ngspice, up to SAMPLE_CHUNK samples in
    one Dask task, each record appended to the results file (default PLAN.results.jsonl) the moment its Dask
    task finishes, ``resume`` skipping the samples it already holds (a killed run measures those of its
    unfinished Dask tasks again). ``target`` and ``confidence`` (fractions) override the plan's. The run keeps in memory
    what the statistics read of each record (statistics_part); SampleRun.whole_records reads them whole."""
    tasks, netlists = checked_samples(splan)
    run = run_tasks(splan.plan, tasks, jobs=workers, cluster=cluster, out=out, resume=resume, force=force, progress=progress,
                    noun="samples", netlists=netlists, chunk=SAMPLE_CHUNK, held=statistics_part)
    confidence = confidence if confidence is not None else splan.confidence
    target = target if target is not None else splan.target
    statistics = summarise(run.records, [r.text for r in splan.plan.requirements], confidence=confidence, target=target)
    return SampleRun(splan, run, statistics)


def rerun_sample(splan: SamplePlan, name: str, *, keep_decks: str | Path | None = None) -> tuple[LoopResult, ...]:
    """Measure one sample (``"27C#17"``) again, alone, in this process: its corner's netlist with its seed, as the
    workers measure it, so its T is bit for bit the one in the results file. One result per break node of the
    plan (for ``at = "auto"``, one per loop group). NetloopError naming the samples when there is none of that name."""
    from netloop.jobs.measure import measure

    every = sample_tasks(splan)
    tasks = [t for t in every if t.corner.name == name.strip()]
    if not tasks:
        raise NetloopError(f"the plan has no sample named {name!r}; samples are named CORNER{SEPARATOR}N with N from 1 to "
                           f"{splan.count}, as the tables show (such as {every[0].corner.name!r})")
    plan = splan.plan
    options = {"driver": plan.driver, "method": plan.method, "sweep": plan.sweep, "open_loop_rhp_poles": plan.open_loop_rhp_poles,
               "requirements": [r.text for r in plan.requirements], "timeout_s": plan.timeout_s, "keep_decks": keep_decks}
    netlist = apply_settings(tasks[0].corner.netlist, tasks[0].corner.settings)
    if tasks[0].at == AUTO:
        from netloop.jobs.discover import measure_all_loops

        results, _notes = measure_all_loops(netlist, **options)
        return tuple(results)
    return tuple(measure(netlist, t.at, label=name, **options) for t in tasks)
