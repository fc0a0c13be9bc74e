"""Run the AC runs of one job side by side, each group on its own simulator (its own ngspice).

The runs of a job share one operating point and differ only in which source is excited, so they
are independent analyses: on a machine with free cores, two ngspice processes do the two
excitations of a probe in about the time one does one of them. Every simulator loads the whole
circuit and finds the same operating point (ngspice is deterministic on the same deck), so the
result equals the result of one simulator running every run in turn.
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import replace
from pathlib import Path

from netloop.errors import SimulationError
from netloop.sim.convergence import aid_ladder
from netloop.sim.job import SimJob, SimResult, Simulator
from netloop.sim.keep import keep_deck, keep_output, runnable_deck

__all__ = ["MAX_AUTO_PROCESSES", "SPLIT_MIN_ELEMENTS", "SplitRunsSimulator", "processes_for", "split_runs", "usable_cpus"]

# Below this many elements a second ngspice's fixed costs (its start, its own load of the deck) eat
# what it saves. `netloop check --at out` on benchmarks/check_speed.py's RC-ladder loop, 2 CPUs,
# --processes 1 vs 2: 20k elements 1.38 vs 1.38-1.53 s; 40k 3.6-3.7 vs 2.7 s; 60k 7.1-7.3 vs 4.6 s;
# 100k 18.2 vs 10.3 s (ngspice's own time grows faster than the element count there).
SPLIT_MIN_ELEMENTS = 30_000


def usable_cpus() -> int:
    """The CPUs this process may run on (its affinity mask where the platform has one)."""
    try:
        return len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        return os.cpu_count() or 1


# Each process holds the whole circuit: on a many-core machine a comparison of many locations
# would otherwise start one ngspice a run, each with its own copy of a large netlist.
MAX_AUTO_PROCESSES = 4


def processes_for(elements: int, runs: int) -> int:
    """How many ngspice processes should share a job of ``runs`` runs on a circuit of ``elements``
    elements: one a run, up to the usable CPUs and MAX_AUTO_PROCESSES, on a large circuit; else one."""
    if elements < SPLIT_MIN_ELEMENTS:
        return 1
    return max(1, min(usable_cpus(), runs, MAX_AUTO_PROCESSES))


def split_runs(job: SimJob, groups: int) -> tuple[SimJob, ...]:
    """``job`` as up to ``groups`` jobs, run ``i`` in job ``i % groups``; only the first asks for
    the operating-point voltages (they are the same in every group)."""
    count = max(1, min(groups, len(job.runs)))
    return tuple(
        replace(job, runs=job.runs[g::count], op_voltages=job.op_voltages and g == 0) for g in range(count)
    )


def _runs_in_order(job: SimJob, results: Sequence[SimResult]) -> tuple:
    count = len(results)
    return tuple(results[i % count].runs[i // count] for i in range(len(job.runs)))


class SplitRunsSimulator:
    """Gives each of ``simulators`` a share of every job's runs and runs the shares at once.

    A job of one run (or no run) goes to the first simulator whole. ``keep_dir``: keep each job's
    whole deck there, as one simulator would have run it; this simulator keeps the decks, so the
    ``keep_dir`` of every inner simulator that has one is set to None. When a share fails, the error
    of the first failing share is raised after every share has ended.
    """

    def __init__(self, simulators: Sequence[Simulator], keep_dir: str | None = None):
        if not simulators:
            raise ValueError("SplitRunsSimulator needs at least one simulator")
        self.simulators = tuple(simulators)
        self.keep_dir = keep_dir
        for sim in self.simulators:
            if getattr(sim, "keep_dir", None) is not None:
                sim.keep_dir = None
        self.backend = getattr(self.simulators[0], "backend", type(self.simulators[0]).__name__)
        self._pool = ThreadPoolExecutor(max(1, len(self.simulators) - 1), thread_name_prefix="netloop-sim-share")

    def run(self, job: SimJob) -> SimResult:
        shares = split_runs(job, len(self.simulators))
        if len(shares) == 1:
            return self._kept(job, self.simulators[0].run(job))
        others = [self._pool.submit(sim.run, share) for sim, share in zip(self.simulators[1:], shares[1:], strict=False)]
        outcomes: list[SimResult | BaseException] = []
        try:
            outcomes.append(self.simulators[0].run(shares[0]))
        except Exception as exc:  # noqa: BLE001 - raised below, once every share has ended
            outcomes.append(exc)
        except BaseException:
            self.abort()
            raise
        for running in others:
            try:
                outcomes.append(running.result())
            except Exception as exc:  # noqa: BLE001 - raised below
                outcomes.append(exc)
        for outcome in outcomes:
            if isinstance(outcome, BaseException):
                rekept = self._rekept(job, outcome)
                if rekept is outcome:
                    raise outcome
                raise rekept from outcome
        results: list[SimResult] = outcomes  # type: ignore[assignment]
        first = results[0]
        merged = SimResult(
            runs=_runs_in_order(job, results),
            operating_point=first.operating_point,
            log="\n".join(r.log for r in results if r.log),
            deck_path=first.deck_path,
            convergence_aid=next((r.convergence_aid for r in results if r.convergence_aid), None),
            backend=first.backend,
            parameters=first.parameters,
            loaded=any(r.loaded for r in results),
            ngspice_seconds=sum(r.ngspice_seconds for r in results),
        )
        return self._kept(job, merged)

    def _kept(self, job: SimJob, result: SimResult) -> SimResult:
        if self.keep_dir is None:
            return result
        aid = result.convergence_aid if result.convergence_aid in aid_ladder(job)[1:] else None
        return replace(result, deck_path=keep_deck(runnable_deck(job, aid), job.label, self.keep_dir))

    def _rekept(self, job: SimJob, error: BaseException) -> BaseException:
        """A share's failure with the whole job's deck kept in ``keep_dir`` (the share kept only its runs), the share's
        whole ngspice output kept beside it."""
        if self.keep_dir is None or type(error) is not SimulationError:
            return error
        deck = keep_deck(runnable_deck(job, None), job.label, self.keep_dir)
        log = keep_output(deck, Path(error.log_path).read_text(encoding="utf-8")) if error.log_path else None
        return SimulationError(error.message, deck, error.simulator_output, error.corner, log)

    def operating_point(self, netlist: str) -> Mapping[str, float]:
        return self.simulators[0].operating_point(netlist)

    def abort(self) -> None:
        """Stop every simulator's running job (those that can be stopped)."""
        for sim in self.simulators:
            abort = getattr(sim, "abort", None)
            if abort is not None:
                abort()

    def close(self) -> None:
        for sim in self.simulators:
            close = getattr(sim, "close", None)
            if close is not None:
                close()
        self._pool.shutdown(wait=False)

    def __enter__(self) -> SplitRunsSimulator:
        return self

    def __exit__(self, *exc_info: object) -> None:
        self.close()
