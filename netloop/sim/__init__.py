"""sim stage: run ngspice on AC jobs behind one Simulator protocol, and give back numpy arrays.

job         SimJob/AcRun/AcSweep in, SimResult/RunResult out; the Simulator protocol
shared      libngspice hosted in a worker process (timeouts, restarts)
batch       ``ngspice -b`` on a rendered deck, results read from raw files
analytic    a fake simulator from formulas, for testing the stages above without ngspice
split       the runs of one job shared out to several simulators, run side by side
rawfile     reader for ngspice's binary and ascii raw files
library     where libngspice and the ngspice binary are
spawn       the worker process started ahead of the first job (``netloop check`` starts it first thing)
in_place    values of a loaded circuit changed in place for the next job (temperature, sources, .param, R/C/L values)
used_models the deck's model libraries written out with only the model cards and subcircuits the circuit uses

Names are imported on first use (as in the netloop package), so that the worker process and an early
start of it (spawn) do not wait for the modules they do not need.
"""

from __future__ import annotations

import importlib
import sys
from typing import Literal

from netloop.errors import SimulationError, SimulatorUnavailableError

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

_EXPORTS = {
    "AcRun": "netloop.sim.job",
    "AcSweep": "netloop.sim.job",
    "Alter": "netloop.sim.job",
    "AnalyticSimulator": "netloop.sim.analytic",
    "BatchSimulator": "netloop.sim.batch",
    "Change": "netloop.sim.job",
    "DEFAULT_OP_AIDS": "netloop.sim.convergence",
    "RawPlot": "netloop.sim.rawfile",
    "RunResult": "netloop.sim.job",
    "SharedLibrarySimulator": "netloop.sim.shared",
    "SimJob": "netloop.sim.job",
    "SimResult": "netloop.sim.job",
    "Simulator": "netloop.sim.job",
    "SplitRunsSimulator": "netloop.sim.split",
    "find_libngspice": "netloop.sim.library",
    "find_ngspice_binary": "netloop.sim.library",
    "processes_for": "netloop.sim.split",
    "read_raw": "netloop.sim.rawfile",
    "sweep_frequencies": "netloop.sim.frequency",
}


def __getattr__(name: str):
    """A public name, imported from its module on first use."""
    if name not in _EXPORTS:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(_EXPORTS[name]), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *_EXPORTS})


def start_simulators(count: int, backend: Literal["auto", "shared", "batch"] = "auto") -> list[Simulator]:
    """``count`` default simulators (no kept decks), started side by side; if one fails to start, the
    others are closed and its error raised."""
    from concurrent.futures import ThreadPoolExecutor  # noqa: PLC0415

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
    this = sys.modules[__name__]  # names looked up on the package, where they load on first use (and tests replace them)
    if processes > 1:
        return this.SplitRunsSimulator(start_simulators(processes, backend), keep_dir=keep_dir)
    if backend == "shared":
        simulator = this.SharedLibrarySimulator(keep_dir=keep_dir)
        simulator.start()
        return simulator
    if backend == "batch":
        return this.BatchSimulator(keep_dir=keep_dir)
    if backend != "auto":
        raise ValueError(f"backend must be 'auto', 'shared' or 'batch', not {backend!r}")
    problems = []
    if this.find_libngspice() is not None:
        simulator = this.SharedLibrarySimulator(keep_dir=keep_dir)
        try:
            simulator.start()
        except this.SimulatorUnavailableError as exc:
            problems.append(exc.reason or "libngspice cannot be started")
        except this.SimulationError as exc:
            problems.append(str(exc))
        else:
            return simulator
    else:
        problems.append("libngspice not found")
    if this.find_ngspice_binary() is not None:
        return this.BatchSimulator(keep_dir=keep_dir)
    problems.append("no ngspice binary on PATH")
    raise this.SimulatorUnavailableError("; ".join(problems))
