"""ngspice work that overlaps the caller's own: simulators that start in the background, and a job run while the caller works."""

from __future__ import annotations

from collections.abc import Callable
import threading
from concurrent.futures import Future, ThreadPoolExecutor, wait
from typing import TypeVar

from netloop.errors import SimulationError
from netloop.sim.job import SimJob, SimResult, Simulator
from netloop.sim.split import SplitRunsSimulator

__all__ = ["StartingSimulator", "run_while"]

T = TypeVar("T")

_SEND_HEAD_START_S = 0.05  # ample to render, pickle and write a 100k-element job (about 30 ms)


def _in_background(start: Callable[..., object], *args, **kwargs) -> Future:
    """``start(...)`` in a thread of its own, so that it overlaps the caller's work."""
    pool = ThreadPoolExecutor(1, thread_name_prefix="netloop-sim-start")
    try:
        return pool.submit(start, *args, **kwargs)
    finally:
        pool.shutdown(wait=False)


def _close_started(started: Future) -> None:
    """Close what a background start gave: one simulator or a list of them (nothing if it failed)."""
    if started.exception() is not None:
        return
    result = started.result()
    for sim in result if isinstance(result, list) else [result]:
        close = getattr(sim, "close", None)
        if close is not None:
            close()


class StartingSimulator:
    """The default ngspice simulator, started in the background the moment this is made.

    The caller goes on (reads and breaks the netlist) while ngspice starts; ``use_processes(n)``
    starts n - 1 more ngspice processes the same way, and then every job's runs are shared out to
    them (SplitRunsSimulator). The first ``run`` waits for the starts. ``close()`` closes whatever
    has started, including a start still under way (closed the moment it finishes). Use it as a
    context manager. A start that failed raises its error at the first ``run``.
    """

    def __init__(self, keep_dir: str | None = None, start: Callable[..., Simulator] | None = None) -> None:
        """``start(keep_dir=...)`` makes one started simulator (default: netloop.sim.default_simulator)."""
        if start is None:
            from netloop.sim import default_simulator as start  # noqa: PLC0415 - the package's factory, defined after this module loads

        self.keep_dir = keep_dir
        self._start = start
        self._first = _in_background(start, keep_dir=keep_dir)
        self._more: Future | None = None
        self._ready: Simulator | None = None
        self._closed = False
        self._start_lock = threading.Lock()  # one thread joins the starts; others wait for it
        self._lock = threading.Lock()  # the job tokens below (never held while waiting for a start)
        self._jobs: set[object] = set()  # tokens of the jobs whose run() was called and has not returned
        self._aborted: set[object] = set()

    def use_processes(self, count: int) -> None:
        """Share each job's runs out to ``count`` ngspice processes (the others start now, in the background)."""
        if count > 1 and self._more is None and self._ready is None:
            self._more = _in_background(lambda: [self._start(keep_dir=None) for _ in range(count - 1)])

    def ready(self) -> Simulator:
        """The started simulator (one, or several sharing the runs); waits for the starts."""
        with self._start_lock:
            return self._join()

    def _join(self) -> Simulator:
        if self._ready is None:
            futures = [f for f in (self._first, self._more) if f is not None]
            wait(futures)
            failed = next((f.exception() for f in futures if f.exception() is not None), None)
            if failed is not None:
                for future in futures:
                    _close_started(future)
                self._closed = True
                raise failed
            first = self._first.result()
            self._ready = first if self._more is None else SplitRunsSimulator([first, *self._more.result()], keep_dir=self.keep_dir)
        return self._ready

    @property
    def backend(self) -> str:
        return getattr(self.ready(), "backend", "")

    @property
    def simulators(self) -> tuple[Simulator, ...]:
        """The ngspice processes that share each job (one when there is no split)."""
        ready = self.ready()
        return tuple(getattr(ready, "simulators", (ready,)))

    def run(self, job: SimJob) -> SimResult:
        """Run the job once the simulator has started. A job counts from the moment this is called:
        an abort() while the start is still under way abandons it too."""
        token = object()
        with self._lock:
            self._jobs.add(token)
        try:
            simulator = self.ready()
            if token not in self._aborted:
                result = simulator.run(job)
            if token in self._aborted:  # before it reached the simulator, or in the moment it did
                raise SimulationError("the job was abandoned (abort)", corner=job.label or None)
            return result
        finally:
            with self._lock:
                self._jobs.discard(token)
                self._aborted.discard(token)

    def abort(self) -> None:
        """Abandon the jobs running now: their ``run`` raises SimulationError (see SharedLibrarySimulator.abort)."""
        with self._lock:
            self._aborted |= self._jobs
            ready = self._ready
        abort = getattr(ready, "abort", None)
        if abort is not None:
            abort()

    def close(self) -> None:
        if self._closed:
            return
        self._closed = True
        if self._ready is not None:
            close = getattr(self._ready, "close", None)
            if close is not None:
                close()
            return
        for future in (self._first, self._more):
            if future is not None:
                future.add_done_callback(_close_started)

    def __enter__(self) -> StartingSimulator:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def run_while(simulator: Simulator, job: SimJob, meanwhile: Callable[[], T]) -> tuple[SimResult, T]:
    """``simulator.run(job)`` in a thread while this thread calls ``meanwhile()``; both results.

    The job is sent first (a short head start), then ``meanwhile()`` competes for the interpreter.
    When ``meanwhile()`` raises (or the wait is interrupted), the job is abandoned: a simulator with
    ``abort()`` stops at once, any other is waited for; its result or error is dropped and the
    exception of this thread is raised.
    """
    pool = ThreadPoolExecutor(1, thread_name_prefix="netloop-sim-run")
    try:
        running = pool.submit(simulator.run, job)
    finally:
        pool.shutdown(wait=False)
    try:
        wait([running], timeout=_SEND_HEAD_START_S)
        value = meanwhile()
        return running.result(), value
    except BaseException:
        if not running.done():
            abort = getattr(simulator, "abort", None)
            if abort is not None:
                abort()
            wait([running])
        raise
