"""The measured loop measured again with values changed on the loaded circuit: near its crossovers only, or whole."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np

from netloop.analysis.local import LocalReading, Window, read_windows, reading_of
from netloop.analysis.results import LoopAnalysis
from netloop.jobs.measure import Sweep, return_ratio, sample_loops
from netloop.probe import ProbeVectors
from netloop.sim import AcSweep, Alter, SimJob, SimResult, Simulator

__all__ = ["Reading", "Remeasure"]


@dataclass(frozen=True, slots=True)
class Reading:
    """The figures of the loop with some values changed, how they were found, and the values as loaded."""

    figures: LocalReading
    whole_sweep: bool  # True: the windows could not be trusted (or there were none) and a whole sweep was measured
    loaded: dict[str, float]  # Alter.ref -> the value ngspice had loaded, before the change


@dataclass(frozen=True, slots=True)
class Remeasure:
    """What it takes to measure the loop again with values changed: the measured loop's probe job (its
    circuit stays loaded in the simulator, so a change costs no new load), how T follows from its runs,
    the sweep plan, and the windows around the measured crossovers and peak.

    Every job sent keeps the probe job's circuit and adds Alters: ngspice solves the operating point
    again at every AC analysis, so a change that moves it (a resistor, a gain, a transistor size) is
    re-solved, and a capacitor or inductor, which carries no DC, leaves it as it was.
    """

    job: SimJob
    vectors: ProbeVectors
    method: str
    sweep: Sweep
    open_loop_rhp_poles: int | None
    windows: tuple[Window, ...]
    stable: bool
    floor_db: float

    def window_job(self, alters: Sequence[Alter]) -> SimJob:
        """The probe job on the windows' frequencies only, with ``alters``."""
        sweeps = tuple(AcSweep("lin", w.points, w.fstart_hz, w.fstop_hz) for w in self.windows)
        return replace(self.job, runs=tuple(replace(run, sweeps=sweeps) for run in self.job.runs), alters=tuple(alters))

    def ratio(self, result: SimResult) -> np.ndarray:
        series, shunt = result.run("series"), result.run("shunt")
        return return_ratio(self.vectors, dict(series.vectors), dict(shunt.vectors), self.method)

    def read(self, simulator: Simulator, alters: Sequence[Alter]) -> Reading:
        """The figures with ``alters``: from the windows when they can be trusted, else from a whole sweep."""
        if self.windows:
            result = simulator.run(self.window_job(alters))
            figures = read_windows(self.windows, result.runs[0].freq_hz, self.ratio(result), stable=self.stable, floor_db=self.floor_db)
            if figures.problem is None:
                return Reading(figures, False, dict(result.parameters))
        analysis, loaded = self.whole(simulator, alters)
        return Reading(reading_of(analysis), True, loaded)

    def whole(self, simulator: Simulator, alters: Sequence[Alter], label: str = "") -> tuple[LoopAnalysis, dict[str, float]]:
        """The whole analysis with ``alters`` (netloop.jobs.measure.sample_loops: sweep, widen, refine), and the loaded values."""
        loaded: dict[str, float] = {}
        base = replace(self.job, alters=tuple(alters), label=label or self.job.label)

        def job_for(sweeps: tuple[AcSweep, ...]) -> SimJob:
            return replace(base, runs=tuple(replace(run, sweeps=sweeps) for run in base.runs))

        def ratios(result: SimResult) -> dict[str, np.ndarray]:
            loaded.update(result.parameters)
            return {"loop": self.ratio(result)}

        analyses, _info, _warnings = sample_loops(job_for, ratios, simulator, self.sweep, {"loop": self.open_loop_rhp_poles})
        return analyses["loop"], loaded
