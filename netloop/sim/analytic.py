"""A fake simulator computing vectors from given functions, so stages above sim test without ngspice."""

from __future__ import annotations

from collections.abc import Callable, Mapping

import numpy as np

from netloop.errors import SimulationError
from netloop.sim.deck import excited_sources, save_key
from netloop.sim.frequency import merge_sweeps, sweep_frequencies
from netloop.sim.job import RunResult, SimJob, SimResult

__all__ = ["AnalyticSimulator", "Response"]

Response = Callable[[np.ndarray, Mapping[str, float]], np.ndarray]
"""``f(freq_hz, ac)`` -> complex array; ``ac`` maps every excitable source (lower-case) to its AC magnitude."""


class AnalyticSimulator:
    """Answers a SimJob from ``responses`` (vector name -> function of frequency and the run's AC).

    Frequencies are the points ngspice's sweeps would visit; sources a run does not name get AC 0.
    ``operating_point`` is returned as given. Every job it ran is kept in ``jobs``.
    """

    backend = "analytic"

    def __init__(self, responses: Mapping[str, Response], operating_point: Mapping[str, float] | None = None):
        self.responses = {save_key(k): v for k, v in responses.items()}
        self.op = {k.lower(): float(v) for k, v in (operating_point or {}).items()}
        self.jobs: list[SimJob] = []

    def run(self, job: SimJob) -> SimResult:
        self.jobs.append(job)
        sources = excited_sources(job)
        runs = []
        for run in job.runs:
            given = {k.strip().lower(): float(v) for k, v in run.ac.items()}
            ac = {name: given.get(name, 0.0) for name in sources}
            parts = []
            for sweep in run.sweeps:
                freq = sweep_frequencies(sweep)
                vectors = {}
                for name in job.save:
                    key = save_key(name)
                    if key not in self.responses:
                        raise SimulationError(f"the analytic simulator has no response for {key!r}", corner=job.label or None)
                    values = np.broadcast_to(np.asarray(self.responses[key](freq, dict(ac)), dtype=np.complex128), freq.shape)
                    vectors[key] = np.array(values)
                parts.append((freq, vectors))
            freq, vectors = merge_sweeps(parts)
            runs.append(RunResult(name=run.name, freq_hz=freq, vectors=vectors))
        return SimResult(runs=tuple(runs), operating_point=dict(self.op), backend=self.backend)

    def operating_point(self, netlist: str) -> Mapping[str, float]:
        return dict(self.op)

    def close(self) -> None:
        """Nothing to stop; here so that every simulator reads alike."""
