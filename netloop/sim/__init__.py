"""sim stage: run ngspice on AC jobs behind one Simulator protocol, and give back numpy arrays.

job         SimJob/AcRun/AcSweep in, SimResult/RunResult out; the Simulator protocol
shared      libngspice hosted in a worker process (timeouts, restarts)
batch       ``ngspice -b`` on a rendered deck, results read from raw files
analytic    a fake simulator from formulas, for testing the stages above without ngspice
split       the runs of one job shared out to several simulators, run side by side
rawfile     reader for ngspice's binary and ascii raw files
library     where libngspice and the ngspice binary are
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from typing import Literal

from netloop.errors import SimulationError, SimulatorUnavailableError
from netloop.sim.analytic import AnalyticSimulator
from netloop.sim.batch import BatchSimulator
from netloop.sim.convergence import DEFAULT_OP_AIDS
from netloop.sim.frequency import sweep_frequencies
from netloop.sim.job import AcRun, AcSweep, Alter, Change, RunResult, SimJob, SimResult, Simulator
from netloop.sim.library import find_libngspice, find_ngspice_binary
from netloop.sim.rawfile import RawPlot, read_raw
from netloop.sim.shared import SharedLibrarySimulator
from netloop.sim.split import SplitRunsSimulator, processes_for

__all__ = [
    "DEFAULT_OP_AIDS",
    "AcRun",
    "AcSweep",
    "Alter",
    "AnalyticSimulator",
    "BatchSimulator",
    "Change",
    "RawPlot",
    "RunResult",
    "SharedLibrarySimulator",
    "SimJob",
    "SimResult",
    "Simulator",
    "SplitRunsSimulator",
    "default_simulator",
    "find_libngspice",
    "find_ngspice_binary",
    "processes_for",
    "read_raw",
    "start_simulators",
    "sweep_frequencies",
]


def start_simulators(count: int, backend: Literal["auto", "shared", "batch"] = "auto") -> list[Simulator]:
    """``count`` default simulators (no kept decks), started side by side; if one fails to start, the
    others are closed and its error raised."""
    with ThreadPoolExecutor(max(count, 1), thread_name_prefix="netloop-sim-start") as pool:
        starting = [pool.submit(default_simulator, None, backend) for _ in range(count)]
    started = [s.result() for s in starting if s.exception() is None]
    failed = [s.exception() for s in starting if s.exception() is not None]
    if failed:
        for sim in started:
            sim.close()
        raise failed[0]
    return started


def default_simulator(keep_dir: str | None = None, backend: Literal["auto", "shared", "batch"] = "auto", processes: int = 1) -> Simulator:
    """The shared-library backend if libngspice loads, else batch mode, else SimulatorUnavailableError.

    ``backend`` picks one explicitly ("shared" or "batch"); ``keep_dir`` keeps every deck there.
    ``processes`` > 1: that many ngspice processes, started side by side, share every job's runs
    (a SplitRunsSimulator).
    """
    if processes > 1:
        return SplitRunsSimulator(start_simulators(processes, backend), keep_dir=keep_dir)
    if backend == "shared":
        simulator = SharedLibrarySimulator(keep_dir=keep_dir)
        simulator.start()
        return simulator
    if backend == "batch":
        return BatchSimulator(keep_dir=keep_dir)
    if backend != "auto":
        raise ValueError(f"backend must be 'auto', 'shared' or 'batch', not {backend!r}")
    problems = []
    if find_libngspice() is not None:
        simulator = SharedLibrarySimulator(keep_dir=keep_dir)
        try:
            simulator.start()
        except SimulationError as exc:
            problems.append(str(exc))
        else:
            return simulator
    else:
        problems.append("libngspice not found")
    if find_ngspice_binary() is not None:
        return BatchSimulator(keep_dir=keep_dir)
    problems.append("no ngspice binary on PATH")
    raise SimulatorUnavailableError("; ".join(problems))
