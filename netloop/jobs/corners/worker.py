"""What runs on a worker: apply one corner, measure it with this process's own ngspice, return plain records."""

from __future__ import annotations

import os
import socket
import time
import traceback
from dataclasses import dataclass, replace

from netloop.jobs.corners.apply import apply_settings
from netloop.jobs.corners.expand import Task
from netloop.jobs.corners.plan import Setting
from netloop.errors import NetloopError, SimulationError
from netloop.jobs.measure import Sweep, measure
from netloop.netlist import parse_file

__all__ = ["TaskOptions", "close_simulator", "corner_netlist", "files_state", "in_place_changes", "read_key", "run_chunk", "run_task",
           "sample_decisions", "stop_run", "use_netlists", "worker_simulator"]

_SIMULATOR = None  # one ngspice per worker process, started by the first corner it runs
_READ: dict[tuple, tuple[object, tuple]] = {}  # corner netlists this worker read: (netlist, its files' state) by what it was read from
_READ_KEEP = 8
_REREAD = ("lib", "include")  # the settings apply_settings reads the files again for (process arrives expanded into them)
_GIVEN: dict[tuple, tuple[object, tuple]] = {}  # the netlists the plan's check read, sent with the task (run_task's ``netlists``)
_STOPPED: set[str] = set()  # the runs interrupted (stop_run): a few bytes each, for the life of the worker
_DECISIONS: dict[tuple, dict] = {}  # split decisions kept for the samples of a corner (measure's ``decisions``), _READ_KEEP at most


@dataclass(frozen=True, slots=True)
class TaskOptions:
    """The measurement options shared by every task of a plan."""

    method: str = "tian"
    driver: str | None = None
    sweep: Sweep = Sweep()
    open_loop_rhp_poles: int | None = None
    requirements: tuple[str, ...] = ()
    timeout_s: float = 600.0
    share_loads: bool = True  # a corner may run on the circuit the previous one left loaded (in_place_changes)


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


def files_state(files: tuple[str, ...]) -> tuple:
    """What says a file is unchanged without reading it: size and modification time of each (None when it is gone)."""
    out = []
    for f in files:
        try:
            st = os.stat(f)
            out.append((st.st_size, st.st_mtime_ns))
        except OSError:
            out.append(None)
    return tuple(out)


def use_netlists(netlists: dict[tuple, tuple] | None) -> None:
    """The netlists the plan's check read ({read_key: (netlist, files_state of its files)}), for this process's next
    corners: corner_netlist takes one instead of reading it while its files are unchanged (None: none given)."""
    global _GIVEN
    _GIVEN = netlists or {}


def read_key(corner) -> tuple:
    """What a corner's netlist is read from before its in-place settings: its path and its settings that read the files
    again (lib, include), in order. corner_netlist keeps what it read by this key; check_plan sends what it read so."""
    return (corner.netlist, tuple((s.kind, s.target, s.value) for s in corner.settings if s.kind in _REREAD))


def corner_netlist(corner):
    """The corner's netlist with its settings applied, as apply_settings gives it. The settings that read the files again
    (lib, include) are applied once per worker and kept while none of the files read changes (size and modification
    time), so the samples of one corner, which differ only in their seed, do not each read the netlist and its model files
    in Python, and the netlist as written is read once for all of them; the other settings (temperature, .param, supply, element, seed) are applied to that copy each time.
    A netlist the plan's check read (run_task's ``netlists``) serves in place of a read of this worker's own while its
    files are unchanged."""
    return _corner_netlist(corner)[0]


def _corner_netlist(corner) -> tuple:
    """(corner_netlist(corner), the files_state of its files as found while taking it): run_task hands the state to
    sample_decisions, which keys on it, so that a sample states each file once, not twice (25 us a sample of 8 files)."""
    reread = tuple(s for s in corner.settings if s.kind in _REREAD)
    rest = tuple(s for s in corner.settings if s.kind not in _REREAD)

    def written():  # each section of a process axis starts from it
        return _kept((corner.netlist, ()), lambda: parse_file(corner.netlist))

    base, state = _kept(read_key(corner), lambda: apply_settings(written()[0], reread)) if reread else written()
    netlist = apply_settings(base, rest)
    return netlist, state if netlist.files == base.files else files_state(netlist.files)


def _kept(key: tuple, read) -> tuple:
    """(the netlist this worker read for ``key`` (``read()`` gives it) or was given, the files_state of its files), read
    again when one of its files changed (size or modification time); the _READ_KEEP most recently used are kept."""
    kept = _READ.pop(key, None) or _GIVEN.get(key)
    if kept is None or files_state(kept[0].files) != kept[1]:
        netlist = read()
        kept = (netlist, files_state(netlist.files))
    return _keep_last(_READ, key, kept)


def _keep_last(store: dict, key: tuple, value):
    """``value`` stored under ``key`` as the most recently used, the least recently used dropped beyond _READ_KEEP."""
    store.pop(key, None)
    store[key] = value
    while len(store) > _READ_KEEP:
        del store[next(iter(store))]
    return value


def sample_decisions(corner, netlist, state: tuple | None = None) -> dict | None:
    """For a statistical sample (a corner with a seed), measure's ``decisions``: where and how its node is split, kept for
    every sample of the corner, whose netlists differ only in ngspice's seed, while the files read are unchanged; None for
    a corner without a seed (no other task shares its netlist). ``state``: files_state(netlist.files) when the caller has
    just found it (None: stated here)."""
    if not any(s.kind == "seed" for s in corner.settings):
        return None
    state = files_state(netlist.files) if state is None else state
    key = (corner.netlist, tuple((s.kind, s.target, s.value) for s in corner.settings if s.kind != "seed"), state)
    decisions = _DECISIONS.get(key)
    return _keep_last(_DECISIONS, key, decisions if decisions is not None else {})


def in_place_changes(settings: tuple[Setting, ...]) -> tuple:
    """The corner's settings that ngspice can change on a loaded circuit, as netloop.sim.Change records:
    the temperature, supply DC values, top-level .param values and R, C, L values (as apply_settings writes them)."""
    from netloop.jobs.corners.apply import param_text
    from netloop.sim import Change

    out = []
    for s in settings:
        if s.kind == "temp":
            out.append(Change("temp", "", s.value))
        elif s.kind == "supply":
            out.append(Change("source", s.target, s.value))
        elif s.kind == "param":
            out.append(Change("param", s.target, param_text(s.value)))
        elif s.kind == "element":
            out.append(Change("element", s.target, s.value))
    return tuple(out)


class _InPlace:
    """The worker's simulator, every job of one corner naming the values ngspice may change in place (SimJob.changes):
    the next corner that differs only in those values runs on the circuit this one leaves loaded."""

    def __init__(self, simulator, changes: tuple):
        self._simulator = simulator
        self._changes = changes

    def run(self, job):
        return self._simulator.run(replace(job, changes=self._changes))

    def __getattr__(self, name: str):
        return getattr(self._simulator, name)


def _record(task: Task, at: str, started: float, *, loop: dict | None = None, outcome: str, error: str | None = None, output: str | None = None, sim_seconds: float = 0.0,
            loads: int | None = None) -> dict:
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
        "loads": loads,  # times ngspice read the netlist for this corner; 0: it ran on a circuit already loaded
        "worker": f"{socket.gethostname()}:{os.getpid()}",
        "loop": loop,
    }


def _measure_all(netlist, options: TaskOptions, simulator) -> list:
    from netloop.jobs.discover import measure_all_loops  # the lead's loop discovery; "auto" needs it

    results, _notes = measure_all_loops(netlist, driver=options.driver, method=options.method, sweep=options.sweep,
                                        open_loop_rhp_poles=options.open_loop_rhp_poles, requirements=options.requirements,
                                        simulator=simulator, timeout_s=options.timeout_s)
    return list(results)


def run_task(task: Task, options: TaskOptions, netlists: dict[tuple, tuple] | None = None) -> tuple[dict, ...]:
    """Measure one task; never raises for a corner's own failure: it comes back as an "error" record. ``netlists``: what
    the plan's check read, {read_key: (netlist, files_state of its files)}, used while those files are unchanged."""
    from netloop.jobs.document import to_document

    use_netlists(netlists)
    started = time.perf_counter()
    try:
        netlist, state = _corner_netlist(task.corner)
        simulator = worker_simulator()
        changes = in_place_changes(task.corner.settings) if options.share_loads else ()
        if changes:
            simulator = _InPlace(simulator, changes)
        if task.at == "auto":
            results = _measure_all(netlist, options, simulator)
        else:
            results = [measure(netlist, task.at, driver=options.driver, method=options.method, sweep=options.sweep,
                               open_loop_rhp_poles=options.open_loop_rhp_poles, requirements=options.requirements,
                               simulator=simulator, label=task.corner.name, timeout_s=options.timeout_s,
                               decisions=sample_decisions(task.corner, netlist, state))]
    except SimulationError as exc:
        return (_record(task, task.at, started, outcome="error", error=str(exc), output=exc.simulator_output or None),)
    except NetloopError as exc:
        return (_record(task, task.at, started, outcome="error", error=str(exc)),)
    except Exception as exc:  # noqa: BLE001 - a bug in one corner must not stop the run; the record says what happened
        return (_record(task, task.at, started, outcome="error", error=f"internal error: {exc!r}", output=traceback.format_exc()),)
    records = []
    for r in results:
        doc = to_document(replace(r, label=task.corner.name))
        records.append(_record(task, r.breaks.node, started, loop=doc, outcome=r.verdict, sim_seconds=r.sim.seconds, loads=r.sim.loads))
    return tuple(records)


def run_chunk(tasks: tuple[Task, ...], options: TaskOptions, netlists: dict[tuple, tuple] | None = None,
              run: str | None = None) -> tuple[tuple[dict, ...], ...]:
    """run_task on each task in order, in one Dask task: each task's records, in the order of ``tasks``. Once the run
    named ``run`` is stopped (stop_run), no further task starts: the records of those measured until then (maybe none)."""
    done = []
    for task in tasks:
        if run is not None and run in _STOPPED:
            break
        done.append(run_task(task, options, netlists))
    return tuple(done)


def stop_run(run: str) -> None:
    """Called on each Dask worker (Client.run) when the run named ``run`` is interrupted: its chunks start no further
    task, and hand back what they measured."""
    _STOPPED.add(run)

