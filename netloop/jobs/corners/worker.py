"""What runs on a worker: apply one corner, measure it with this process's own ngspice, return plain records."""

from __future__ import annotations

import os
import socket
import time
import traceback
from dataclasses import dataclass, replace

from netloop.jobs.corners.apply import apply_settings
from netloop.jobs.corners.expand import Task
from netloop.errors import NetloopError, SimulationError
from netloop.jobs.measure import Sweep, measure

__all__ = ["TaskOptions", "close_simulator", "run_task", "worker_simulator"]

_SIMULATOR = None  # one ngspice per worker process, started by the first corner it runs


@dataclass(frozen=True, slots=True)
class TaskOptions:
    """The measurement options shared by every task of a plan."""

    method: str = "tian"
    driver: str | None = None
    sweep: Sweep = Sweep()
    open_loop_rhp_poles: int | None = None
    requirements: tuple[str, ...] = ()
    timeout_s: float = 600.0


def worker_simulator():
    """This process's simulator, started on first use and kept for every later corner."""
    global _SIMULATOR
    if _SIMULATOR is None:
        from netloop.sim import default_simulator

        _SIMULATOR = default_simulator()  # its ngspice runs on one thread (netloop.sim.library.NGSPICE_THREADS)
    return _SIMULATOR


def close_simulator() -> None:
    """Stop this process's simulator (the next corner starts a new one)."""
    global _SIMULATOR
    sim, _SIMULATOR = _SIMULATOR, None
    if sim is not None and hasattr(sim, "close"):
        sim.close()


def _record(task: Task, at: str, started: float, *, loop: dict | None = None, outcome: str, error: str | None = None, output: str | None = None, sim_seconds: float = 0.0) -> dict:
    return {
        "record": "corner",
        "key": task.key,
        "corner": task.corner.name,
        "at": at,
        "netlist": task.corner.netlist,
        "settings": task.corner.describe(),
        "outcome": outcome,  # "pass", "fail" (unstable or a requirement failed) or "error" (not measured)
        "error": error,
        "simulator_output": output,
        "seconds": time.perf_counter() - started,
        "sim_seconds": sim_seconds,
        "worker": f"{socket.gethostname()}:{os.getpid()}",
        "loop": loop,
    }


def _measure_all(netlist, options: TaskOptions, simulator) -> list:
    from netloop.jobs.discover import measure_all_loops  # the lead's loop discovery; "auto" needs it

    results, _notes = measure_all_loops(netlist, driver=options.driver, method=options.method, sweep=options.sweep,
                                        open_loop_rhp_poles=options.open_loop_rhp_poles, requirements=options.requirements,
                                        simulator=simulator, timeout_s=options.timeout_s)
    return list(results)


def run_task(task: Task, options: TaskOptions) -> tuple[dict, ...]:
    """Measure one task; never raises for a corner's own failure: it comes back as an "error" record."""
    from netloop.jobs.document import to_document

    started = time.perf_counter()
    try:
        netlist = apply_settings(task.corner.netlist, task.corner.settings)
        simulator = worker_simulator()
        if task.at == "auto":
            results = _measure_all(netlist, options, simulator)
        else:
            results = [measure(netlist, task.at, driver=options.driver, method=options.method, sweep=options.sweep,
                               open_loop_rhp_poles=options.open_loop_rhp_poles, requirements=options.requirements,
                               simulator=simulator, label=task.corner.name, timeout_s=options.timeout_s)]
    except SimulationError as exc:
        return (_record(task, task.at, started, outcome="error", error=str(exc), output=exc.simulator_output or None),)
    except NetloopError as exc:
        return (_record(task, task.at, started, outcome="error", error=str(exc)),)
    except Exception as exc:  # noqa: BLE001 - a bug in one corner must not stop the run; the record says what happened
        return (_record(task, task.at, started, outcome="error", error=f"internal error: {exc!r}", output=traceback.format_exc()),)
    records = []
    for r in results:
        doc = to_document(replace(r, label=task.corner.name))
        records.append(_record(task, r.breaks.node, started, loop=doc, outcome=r.verdict, sim_seconds=r.sim.seconds))
    return tuple(records)
