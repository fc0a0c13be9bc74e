"""Run a plan's corners in parallel on Dask (a local cluster, or a scheduler's address), journaling each as it ends."""

from __future__ import annotations

import contextlib
import logging
import os
import threading
import uuid
import warnings
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field, replace
from pathlib import Path

from netloop.jobs.corners.apply import CornerApplyError, apply_settings
from netloop.jobs.corners.expand import Corner, Task, expand, tasks_of
from netloop.jobs.corners.interrupt import first_stops, ignoring_interrupts
from netloop.jobs.corners.journal import Journal, default_results_path, fingerprints
from netloop.jobs.corners.plan import AUTO, IN_PLACE, Plan
from netloop.jobs.corners.progress import Progress
from netloop.jobs.corners.worker import TaskOptions, files_state, read_key, run_chunk, stop_run
from netloop.errors import Interrupted, NetlistError, NetloopError, PlanError
from netloop.netlist import Netlist, parse_file

__all__ = ["LOCAL_CLUSTER_CONFIG", "CornerRun", "check_plan", "checked_plan", "chunk_size", "dask_client", "load_groups", "local_cluster",
           "run_plan", "run_tasks", "share_out"]


@dataclass(frozen=True, slots=True)
class CornerRun:
    """The outcome of a plan: one record per corner and break node, in plan order (see netloop.jobs.corners.journal)."""

    plan: str
    results_path: str
    records: tuple[dict, ...]  # whole, or what run_tasks' ``held`` keeps of each (the results file has them whole)
    ran: int  # tasks run now
    skipped: int  # tasks found done in the results file (--resume)
    workers: int = 0
    counts: dict = field(default_factory=dict)
    stale: int = 0  # records in a resumed file that belong to no task of this plan (an earlier version of it): left out
    rerun: dict = field(default_factory=dict)  # resumed corners measured again: corner name -> the input files that changed

    @property
    def passed(self) -> bool:
        """Every corner measured, stable, and every requirement met."""
        return self.verdict == "pass"

    @property
    def verdict(self) -> str:
        """"fail" when a corner failed or could not be simulated, else "inconclusive" when a corner's data
        supported no verdict, else "pass" (a plan with no record is "fail": nothing was shown)."""
        outcomes = {r["outcome"] for r in self.records}
        if not outcomes or outcomes & {"fail", "error"}:
            return "fail"
        return "inconclusive" if "inconclusive" in outcomes else "pass"


def check_plan(plan: Plan) -> tuple[Task, ...]:
    """Expand the plan and apply every corner once, here, so a setting the netlist cannot take stops the
    run before anything is simulated: PlanError at the plan line that asked for it."""
    return checked_plan(plan)[0]


def checked_plan(plan: Plan) -> tuple[tuple[Task, ...], dict[tuple, tuple]]:
    """check_plan's tasks, and the netlists it read for them before their in-place settings, as workers keep them
    ({worker.read_key: (netlist, worker.files_state of its files)}): run_plan sends them, so no worker reads them again."""
    corners = expand(plan)
    if AUTO in plan.at:
        try:
            import netloop.jobs.discover  # noqa: F401
        except ImportError as exc:
            raise plan.error("at = \"auto\" needs netloop's loop discovery, which this installation lacks; name the break nodes", "at") from exc
    written: dict[str, Netlist] = {}  # each netlist as written, read once: every section of a process axis starts from it

    def read(path: str) -> Netlist:
        if path not in written:
            written[path] = parse_file(path)
        return written[path]

    parsed: dict[tuple, tuple] = {}  # read_key -> (netlist, files_state), as a worker keeps them
    files: dict[str, tuple[str, ...]] = {}  # corner name -> every file its netlist reads
    _check_breaks(plan, corners, read)
    for c in corners:
        reread = tuple(s for s in c.settings if s.kind in ("lib", "include"))
        rest = tuple(s for s in c.settings if s.kind not in ("lib", "include", "netlist"))
        key = read_key(c)
        try:
            if key not in parsed:
                base = apply_settings(read(c.netlist), reread) if reread else read(c.netlist)
                parsed[key] = (base, files_state(base.files))
            files[c.name] = apply_settings(parsed[key][0], rest).files
        except CornerApplyError as exc:
            line = plan.line_of_setting(exc.setting, c.line) if exc.setting is not None else c.line
            raise plan.error(f"corner {c.name!r}: {exc}", line=line) from exc
        except NetlistError as exc:
            raise plan.error(f"corner {c.name!r}: {exc}", line=c.line) from exc
    return tuple(replace(t, inputs=files.get(t.corner.name, ())) for t in tasks_of(plan, corners)), parsed


def _check_breaks(plan: Plan, corners: tuple[Corner, ...], read: Callable[[str], Netlist]) -> None:
    """Break each named node once in each netlist the plan uses (as written, ``read(path)``): a node that is not there,
    or cannot be broken, is a PlanError at the ``at`` line instead of one failed corner per corner."""
    from netloop.probe import break_loop

    if AUTO in plan.at:
        return
    for path in dict.fromkeys(c.netlist for c in corners):
        try:
            netlist = read(path)
        except NetlistError as exc:
            raise plan.error(str(exc), "netlist") from exc
        for node in plan.at:
            try:
                break_loop(netlist, node, driver=plan.driver)
            except NetloopError as exc:
                raise plan.error(f"cannot break {path} at {node!r}: {exc}", "at") from exc


@contextlib.contextmanager
def _quiet() -> Iterator[None]:
    """Keep Dask's own logging and warnings away from users: only errors get through."""
    loggers = [logging.getLogger(n) for n in ("distributed", "dask", "tornado", "bokeh")]
    levels = [lg.level for lg in loggers]
    for lg in loggers:
        lg.setLevel(logging.ERROR)
    try:
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", module="distributed")
            warnings.filterwarnings("ignore", module="dask")
            yield
    finally:
        for lg, level in zip(loggers, levels):
            lg.setLevel(level)


# Without a dashboard the scheduler still serves /health on port 8787, and warns when another cluster holds it;
# a free port on the loopback interface avoids both the clash and the warning.
_NO_DEFAULT_PORT = {"dashboard_address": "127.0.0.1:0"}


@contextlib.contextmanager
def dask_client(*, jobs: int | None = None, cluster: str | None = None) -> Iterator[object]:
    """A Dask client: to the scheduler at ``cluster``, or to a local cluster of ``jobs`` single-threaded worker processes."""
    from distributed import Client

    with _quiet():
        if cluster:
            try:
                client = Client(cluster, timeout="30s")
            except (OSError, ValueError, TypeError) as exc:  # unreachable (OSError) or not an address (ValueError)
                raise NetloopError(f"cannot reach a Dask scheduler at {cluster!r} ({exc}); give the address of a running "
                                   "scheduler, such as tcp://10.0.0.5:8786") from exc
            try:
                yield client
            finally:
                client.close()
            return
        with local_cluster(jobs or os.cpu_count() or 1) as local:
            client = Client(local)
            try:
                yield client
            finally:
                client.close()


# What a local cluster without a dashboard does not need, and what it costs: every worker samples its
# own stack every 10 ms (for the dashboard's profile page), every process measures its event loop's
# lag every 20 ms and its CPU and memory every 0.5 s. On two CPUs running two corners at once those
# take time from the corners (benchmarks/corners_scaling.py); an idle 2-worker cluster went from
# about 6.5 % to 2.5 % of a CPU without them.
# And the scheduler sends every corner to a worker at once rather than one at a time (queuing, the
# default, makes each worker wait a round trip to the scheduler between two corners: 16 trivial tasks
# on 2 workers took 27 ms with it and 13-19 ms without).
LOCAL_CLUSTER_CONFIG = {
    "distributed.worker.profile.enabled": False,
    "distributed.admin.tick.interval": "1s",
    "distributed.admin.system-monitor.interval": "5s",
    "distributed.scheduler.worker-saturation": float("inf"),
    # corners are placed on workers by the circuit they need loaded (share_out); a stolen corner would load its own
    "distributed.scheduler.work-stealing": False,
    # Ctrl-C is netloop's to handle (netloop.jobs.corners.interrupt): a worker started again after a crash ignores it too
    "distributed.worker.preload": ["netloop.jobs.corners.interrupt"],
}


@contextlib.contextmanager
def local_cluster(workers: int) -> Iterator[object]:
    """A Dask LocalCluster of ``workers`` single-threaded worker processes on 127.0.0.1, set up for
    corners (no dashboard, none of its sampling; the workers inherit the settings)."""
    import dask
    from distributed import LocalCluster

    with dask.config.set(LOCAL_CLUSTER_CONFIG), ignoring_interrupts():  # the workers never see a terminal's Ctrl-C
        local = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, host="127.0.0.1",
                             dashboard_address=None, scheduler_kwargs=dict(_NO_DEFAULT_PORT), silence_logs=logging.ERROR)
    try:
        yield local
    finally:
        local.close()


def _options(plan: Plan) -> TaskOptions:
    return TaskOptions(method=plan.method, driver=plan.driver, sweep=plan.sweep, open_loop_rhp_poles=plan.open_loop_rhp_poles,
                       requirements=tuple(r.text for r in plan.requirements), timeout_s=plan.timeout_s, share_loads=plan.share_loads)


def load_groups(tasks: list[Task], share_loads: bool = True) -> list[list[Task]]:
    """The tasks grouped by the circuit they need loaded, in plan order: tasks of one group differ only in values ngspice
    changes in place (temperature, supplies, .param values), so one load serves them all. Without ``share_loads`` every
    task is a group of its own."""
    groups: dict[tuple, list[Task]] = {}
    for i, task in enumerate(tasks):
        loaded = tuple((s.kind, s.target, s.value) for s in task.corner.settings if s.kind not in IN_PLACE)
        changed = tuple(sorted((s.kind, s.target) for s in task.corner.settings if s.kind in IN_PLACE))
        key = (task.corner.netlist, task.at, loaded, changed) if share_loads and changed else ("own", i)
        groups.setdefault(key, []).append(task)
    return list(groups.values())


# What a load costs against a corner on a loaded circuit, for sharing groups out (sky130 regulator, official
# process sections: a load about 5 s, a corner after it about 0.1 s; benchmarks/corners_reuse.py).
_LOAD_IN_CORNERS = 10


def share_out(groups: list[list[Task]], workers: int) -> list[list[Task]]:
    """Each worker's tasks, in the order it should run them: whole groups where possible, the largest split so that
    every worker has work and the loads spread evenly (a multiple of ``workers`` chunks); then the chunks dealt out
    largest first to the worker with the least work (a load counting as _LOAD_IN_CORNERS corners)."""
    chunks = [list(g) for g in groups if g]
    if workers < 1 or not chunks:
        return [chunks[0] if chunks else []] if workers >= 1 else []
    wanted = -(-len(chunks) // workers) * workers
    while len(chunks) < wanted:
        largest = max(range(len(chunks)), key=lambda i: (len(chunks[i]), -i))
        if len(chunks[largest]) < 2:
            break
        half = (len(chunks[largest]) + 1) // 2
        chunks[largest:largest + 1] = [chunks[largest][:half], chunks[largest][half:]]
    lists: list[list[Task]] = [[] for _ in range(workers)]
    work = [0] * workers
    for chunk in sorted(chunks, key=len, reverse=True):  # stable: equal chunks keep plan order
        w = min(range(workers), key=lambda i: (work[i], i))
        lists[w].extend(chunk)
        work[w] += _LOAD_IN_CORNERS + len(chunk)
    return lists


def _lost(task: Task, exc: BaseException) -> tuple[dict, ...]:
    """The record of a task whose worker failed outright (not the corner's own simulation)."""
    return ({"record": "corner", "key": task.key, "corner": task.corner.name, "at": task.at, "netlist": task.corner.netlist,
             "settings": task.corner.describe(), "outcome": "error", "error": f"the worker failed: {exc!r}",
             "simulator_output": None, "seconds": 0.0, "sim_seconds": 0.0, "loads": None, "worker": None, "loop": None},)


def run_plan(plan: Plan, *, jobs: int | None = None, cluster: str | None = None, out: str | Path | None = None,
             resume: bool = False, force: bool = False, progress: bool = False) -> CornerRun:
    """Run every corner not yet in the results file; returns every corner's record.

    Each task's records are appended to the results file (``out``, default PLAN.results.jsonl next to the
    plan) as soon as it finishes. An existing file is continued with ``resume`` (corners already in it are
    not run again), replaced with ``force``, and otherwise refused with an error saying so.
    """
    tasks, netlists = checked_plan(plan)
    return run_tasks(plan, tasks, jobs=jobs, cluster=cluster, out=out, resume=resume, force=force, progress=progress, netlists=netlists)


def run_tasks(plan: Plan, tasks: tuple[Task, ...], *, jobs: int | None = None, cluster: str | None = None,
              out: str | Path | None = None, resume: bool = False, force: bool = False, progress: bool = False,
              noun: str = "corners", netlists: dict[tuple, tuple] | None = None, chunk: int = 1,
              held: Callable[[dict], dict] | None = None) -> CornerRun:
    """Run the tasks (checked: `check_plan`, or another job's tasks built from its corners) not yet in the results
    file, as `run_plan` does; ``noun`` names them on the progress bar; ``netlists`` (`checked_plan`'s) go to the workers.
    ``chunk``: up to that many of a worker's tasks in one Dask task (`chunk_size`), for tasks so short that Dask's own
    cost per task counts; their records reach the results file when their Dask task ends. ``held``: what the run keeps
    in memory of each record, the results file having it whole (default: all of it), for runs of many tasks."""
    path = Path(out) if out is not None else default_results_path(plan.path)
    cache: dict[str, str] = {}
    inputs = {t.key: fingerprints(t.inputs, cache) for t in tasks}
    journal = Journal.open(path, plan=plan.path, total=len(tasks), resume=resume, force=force, inputs=inputs)
    keep = held or (lambda record: record)
    by_key: dict[str, tuple[dict, ...]] = {k: tuple(map(keep, v)) for k, v in journal.done.items()}
    pending = [t for t in tasks if t.key not in by_key]
    bar = Progress(len(tasks), enabled=progress, noun=noun)
    bar.done = len(tasks) - len(pending)
    bar.bad = sum(1 for t in tasks if t.key in by_key and any(r["outcome"] != "pass" for r in by_key[t.key]))
    workers, stopped = 0, False
    try:
        if pending:
            bar.draw()
            needed = {read_key(t.corner) for t in pending}
            given = {k: v for k, v in (netlists or {}).items() if k in needed}
            workers, stopped = _run(pending, _options(plan), journal, by_key, bar, jobs=jobs or min(os.cpu_count() or 1, len(pending)), cluster=cluster,
                           inputs=inputs, netlists=given, chunk=chunk, keep=keep)
    finally:
        journal.close()
        bar.finish()
    kept = sum(1 for t in tasks if t.key in by_key)
    if stopped and kept < len(tasks):  # (a Ctrl-C as the last task ended stopped nothing)
        raise Interrupted(f"{kept} of {len(tasks)} {noun} are in {path}; the same command with --resume measures the rest")
    records = tuple(r for t in tasks for r in by_key.get(t.key, ()))
    counts = {k: sum(1 for r in records if r["outcome"] == k) for k in ("pass", "fail", "inconclusive", "error")}
    keys = {t.key for t in tasks}
    stale = sum(len(v) for k, v in journal.done.items() if k not in keys)
    names = {t.key: t.corner.name for t in tasks}
    rerun = {names[k]: files for k, files in journal.rerun.items() if k in names}
    return CornerRun(plan.path, str(path), records, ran=len(pending), skipped=len(tasks) - len(pending), workers=workers,
                     counts=counts, stale=stale, rerun=rerun)


def _fetch(client, batch: list) -> list[tuple[object, tuple[dict, ...] | None]]:
    """(future, records) for each finished future, (future, None) for each failed one."""
    done = [f for f in batch if f.status == "finished"]
    try:
        values = client.gather(done) if done else []
    except Exception:  # noqa: BLE001 - data lost between the batch and the fetch: one by one, each may fail alone
        values = []
        for f in done:
            try:
                values.append(f.result())
            except Exception:  # noqa: BLE001
                values.append(None)
    got = dict(zip(map(id, done), values))
    return [(f, got.get(id(f))) for f in batch]


def chunk_size(tasks: int, chunk: int) -> int:
    """How many of a worker's ``tasks`` go in one Dask task: up to ``chunk``, and at most a quarter of them, so that a
    worker's results still arrive in four parts or more (the progress bar moves, a killed run loses little)."""
    return max(1, min(chunk, tasks // 4))


def _run(pending: list[Task], options: TaskOptions, journal: Journal, by_key: dict, bar: Progress, *, jobs: int, cluster: str | None,
         inputs: dict[str, dict[str, str]], netlists: dict[tuple, tuple], chunk: int = 1, keep: Callable[[dict], dict]) -> tuple[int, bool]:
    """Measure ``pending`` on Dask, each task's records written to ``journal`` as its Dask task ends; returns (the workers
    used, whether a Ctrl-C stopped the run: then the tasks in progress finished and were written, and no further one
    started)."""
    from distributed import as_completed

    with dask_client(jobs=jobs, cluster=cluster) as client, _quiet():
        addresses = sorted(client.scheduler_info().get("workers", {}))
        workers = len(addresses)
        run_id = uuid.uuid4().hex[:8]  # two runs on one scheduler never share a task
        futures: dict = {}
        # each worker gets whole groups of corners that share one loaded circuit, in order (one message to the
        # scheduler per worker: a submit each costs a round trip of its own); a worker that is lost hands its
        # corners on (allow_other_workers), and the local cluster steals none (LOCAL_CLUSTER_CONFIG)
        lists = share_out(load_groups(pending, options.share_loads), workers) if workers else [pending]
        # the netlists the plan's check read, sent once to every worker (each task names the same data)
        given = client.scatter([netlists], broadcast=True, hash=False)[0] if netlists else None
        for address, tasks in zip(addresses or [None], lists):
            if not tasks:
                continue
            size = chunk_size(len(tasks), chunk)
            parts = [tuple(tasks[i:i + size]) for i in range(0, len(tasks), size)]
            keys = [f"netloop-corner-{i:05d}-{part[0].key}-{run_id}" for i, part in enumerate(parts)]
            place = {"workers": [address], "allow_other_workers": True} if address else {}
            sent = client.map(run_chunk, parts, options=options, netlists=given, run=run_id, key=keys, pure=False, **place)
            futures.update(zip(sent, parts, strict=True))
            del sent  # the futures live in ``futures`` alone (let go there once fetched)

        def stop() -> None:  # the first Ctrl-C, in the signal handler: it waits for nothing, and writes nothing (the main
            # thread may be inside a write to the same stream, which Python refuses to enter twice)
            said = (f"\nnetloop: stopping: the {bar.noun} in progress finish and go to the results file; "
                    "Ctrl-C again to stop at once\n")
            threading.Thread(target=_stop_workers, args=(client, run_id, bar.stream, said), daemon=True).start()

        # the futures that finished together are fetched in one round trip to the scheduler; each is then let go, so that
        # its worker forgets its records (a worker holds a task's result while any client holds its future). Once
        # stopped, the chunks hand back what they measured (maybe nothing) and start no further task.
        with first_stops(stop) as stopped:
            for batch in as_completed(futures).batches():
                for future, value in _fetch(client, batch):
                    part = futures.pop(future)
                    if value is None:
                        failed = future.exception()
                        results = [_lost(task, failed) for task in part]
                    else:
                        results = list(value)
                    measured = part[:len(results)] if stopped.is_set() else part  # a stopped chunk's first tasks
                    for task, records in zip(measured, results, strict=True):
                        records = tuple({**r, "inputs": inputs.get(task.key, {})} for r in records)  # what --resume compares
                        journal.write(records)
                        by_key[task.key] = tuple(map(keep, records))
                        loads = [r.get("loads") for r in records]
                        bar.advance(any(r["outcome"] != "pass" for r in records), sum(loads) if None not in loads else None)
    return workers, stopped.is_set()


def _stop_workers(client, run_id: str, stream, said: str) -> None:
    """Write ``said`` to ``stream``, then tell every worker that run ``run_id`` stops (worker.stop_run); a worker that
    cannot be reached finishes its chunk."""
    stream.write(said)
    stream.flush()
    with contextlib.suppress(Exception):  # noqa: BLE001 - the cluster going down meanwhile: the second Ctrl-C is there
        client.run(stop_run, run_id, on_error="ignore")
