"""The measured loop measured again with values changed on the loaded circuit: near its crossovers only, or whole."""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from netloop.analysis.local import LocalReading, Window, read_windows, reading_of
from netloop.analysis.results import LoopAnalysis
from netloop.jobs.measure import Sweep, probe_job, return_ratio, sample_loops
from netloop.jobs.sensitivity.edit import SCALE_PARAM, scaled_netlist
from netloop.jobs.sensitivity.knobs import Knob
from netloop.netlist import Netlist
from netloop.probe import ProbeVectors, split_loop
from netloop.sim import AcSweep, Change, SimJob, SimResult, Simulator

__all__ = ["Copies", "Reading", "Remeasure"]


@dataclass(frozen=True, slots=True)
class Copies:
    """What it takes to measure the loop on an edited copy of the netlist: the netlist as read and the break."""

    netlist: Netlist
    at: str
    driver: str | None
    timeout_s: float

    def probed(self, knob: Knob, scale: float) -> tuple[SimJob, ProbeVectors]:
        """The probe job (no sweeps yet) and vectors of a copy of the netlist with ``knob`` at ``scale`` times its value.

        The copy scales the knob by a parameter (edit.scaled_netlist) and the job names it as a Change: the
        first value of a knob is a load of the copy, the knob's next values are changed in place by ngspice."""
        probed = split_loop(scaled_netlist(self.netlist, knob, scale), self.at, driver=self.driver)[0]
        job = probe_job(probed, (), label=f"{knob.name} x{scale:.6g}", timeout_s=self.timeout_s)
        return replace(job, changes=(Change("param", SCALE_PARAM, repr(scale)),)), probed.vectors


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
    re-solved, and a capacitor or inductor, which carries no DC, leaves it as it was. A knob ngspice
    cannot change in place (Knob.reload: a size of a process device wrapper) is measured on an edited
    copy of the netlist (``copies``), probed as the loop was and read again by ngspice.
    """

    job: SimJob
    vectors: ProbeVectors
    method: str
    sweep: Sweep
    open_loop_rhp_poles: int | None
    windows: tuple[Window, ...]
    stable: bool
    floor_db: float
    copies: Copies | None = None

    def _base(self, knob: Knob, scale: float) -> tuple[SimJob, ProbeVectors]:
        """The job (sweeps still to set) and vectors with ``knob`` at ``scale``: an Alter on the loaded circuit, or an edited copy."""
        if knob.in_place:
            return replace(self.job, alters=(knob.alter(scale),)), self.vectors
        if self.copies is None:
            raise ValueError(f"{knob.name} needs an edited copy of the netlist, and this Remeasure has no netlist to copy")
        return self.copies.probed(knob, scale)

    def window_job(self, knob: Knob, scale: float) -> tuple[SimJob, ProbeVectors]:
        """The job on the windows' frequencies only, with ``knob`` at ``scale``, and its vectors."""
        sweeps = tuple(AcSweep("lin", w.points, w.fstart_hz, w.fstop_hz) for w in self.windows)
        job, vectors = self._base(knob, scale)
        return replace(job, runs=tuple(replace(run, sweeps=sweeps) for run in job.runs)), vectors

    def ratio(self, result: SimResult, vectors: ProbeVectors | None = None) -> np.ndarray:
        series, shunt = result.run("series"), result.run("shunt")
        return return_ratio(vectors or self.vectors, dict(series.vectors), dict(shunt.vectors), self.method)

    def read(self, simulator: Simulator, knob: Knob, scale: float) -> Reading:
        """The figures with ``knob`` at ``scale``: from the windows when they can be trusted, else from a whole sweep."""
        if self.windows:
            job, vectors = self.window_job(knob, scale)
            result = simulator.run(job)
            figures = read_windows(self.windows, result.runs[0].freq_hz, self.ratio(result, vectors), stable=self.stable, floor_db=self.floor_db)
            if figures.problem is None:
                return Reading(figures, False, dict(result.parameters))
        analysis, loaded = self.whole(simulator, knob, scale)
        return Reading(reading_of(analysis), True, loaded)

    def whole(self, simulator: Simulator, knob: Knob, scale: float, label: str = "") -> tuple[LoopAnalysis, dict[str, float]]:
        """The whole analysis with ``knob`` at ``scale`` (netloop.jobs.measure.sample_loops: sweep, widen, refine), and the loaded values."""
        loaded: dict[str, float] = {}
        job, vectors = self._base(knob, scale)
        base = replace(job, label=label or job.label)

        def job_for(sweeps: tuple[AcSweep, ...]) -> SimJob:
            return replace(base, runs=tuple(replace(run, sweeps=sweeps) for run in base.runs))

        def ratios(result: SimResult) -> dict[str, np.ndarray]:
            loaded.update(result.parameters)
            return {"loop": self.ratio(result, vectors)}

        analyses, _info, _warnings = sample_loops(job_for, ratios, simulator, self.sweep, {"loop": self.open_loop_rhp_poles})
        return analyses["loop"], loaded
