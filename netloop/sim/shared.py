"""The shared-library backend: libngspice in a worker process, with a timeout and restarts."""

from __future__ import annotations

import os
import threading
import weakref
from collections.abc import Mapping
from dataclasses import replace
from pathlib import Path

from netloop.errors import SimulationError, SimulatorUnavailableError
from netloop.sim.backend import NgspiceBackend
from netloop.sim.deck import save_key
from netloop.sim.job import AcRun, RunResult, SimJob, SimResult
from netloop.sim.keep import job_error, keep_deck, runnable_deck
from netloop.sim.library import find_libngspice
from netloop.sim.protocol import FrameTimeout, WorkerGone, read_frame_fd, write_frame
from netloop.sim.spawn import spawn, take

__all__ = ["SharedLibrarySimulator"]

class _Worker:
    """One running worker process and its pipes (one started ahead, netloop.sim.spawn, when there is one)."""

    def __init__(self, library_path: str, startup_timeout_s: float):
        self.spawned = take(library_path) or spawn(library_path)
        self.process, self.log_path = self.spawned.process, self.spawned.log_path
        try:
            reply = read_frame_fd(self.process.stdout.fileno(), startup_timeout_s)
        except (FrameTimeout, WorkerGone) as exc:
            log_tail = self.log_tail()
            self.stop()
            raise SimulatorUnavailableError(f"the ngspice worker did not start ({log_tail or type(exc).__name__})") from exc
        if reply[0] != "ready":
            self.stop()
            raise SimulatorUnavailableError(f"libngspice at {library_path} cannot be loaded: {reply[1]}")
        self.version = reply[1]

    def call(self, request: object, timeout_s: float) -> tuple:
        write_frame(self.process.stdin, request)
        return read_frame_fd(self.process.stdout.fileno(), timeout_s)

    def log_tail(self, count: int = 20) -> str:
        try:
            text = self.log_path.read_text(errors="replace")
        except OSError:
            return ""
        return "\n".join(line for line in text.splitlines()[-count:] if line.strip())

    def alive(self) -> bool:
        return self.process.poll() is None

    def stop(self) -> None:
        self.spawned.stop()


def _portable(job: SimJob) -> SimJob:
    """The job as the worker gets it: plain dicts and tuples (so it pickles whatever mappings it was
    built with) and an absolute ``workdir`` (the caller's folder when the job names none)."""
    runs = tuple(AcRun(run.name, {str(k): float(v) for k, v in run.ac.items()}, tuple(run.sweeps)) for run in job.runs)
    return replace(
        job,
        runs=runs,
        save=tuple(job.save),
        excitable=tuple(job.excitable),
        options=tuple(job.options),
        op_aids=tuple(job.op_aids),
        workdir=os.path.abspath(job.workdir or os.getcwd()),
        alters=tuple(job.alters),
        changes=tuple(job.changes),
    )


def _stop_worker(holder: dict) -> None:
    worker = holder.pop("worker", None)
    if worker is not None:
        worker.stop()


class SharedLibrarySimulator(NgspiceBackend):
    """Runs jobs in libngspice hosted by a worker process; restarts the worker after any failure.

    ngspice runs in the job's ``workdir`` (or the caller's current folder) so relative includes resolve.
    ``keep_dir``: keep every deck there (failed decks are always kept, in a temporary folder if
    no ``keep_dir`` is given). Use as a context manager or call ``close()`` to stop the worker.
    """

    backend = "ngspice-shared"

    def __init__(self, library_path: str | None = None, keep_dir: str | os.PathLike[str] | None = None, startup_timeout_s: float = 60.0):
        path = library_path or find_libngspice()
        if path is None:
            raise SimulatorUnavailableError("the ngspice shared library (libngspice.so) was not found")
        self.library_path = path
        self.keep_dir = keep_dir
        self.startup_timeout_s = startup_timeout_s
        self._holder: dict = {}
        self._abandoned: _Worker | None = None  # the worker abort() stopped in the middle of a job
        self._jobs: set[object] = set()  # a token for each job in run(), running or waiting for the lock
        self._aborted: set[object] = set()  # the tokens of the jobs abort() was called for
        self._jobs_lock = threading.Lock()
        self._lock = threading.Lock()
        self._finalizer = weakref.finalize(self, _stop_worker, self._holder)

    def __getstate__(self) -> dict:
        """Pickles as its settings only (for process pools); the copy starts its own worker."""
        return {"library_path": self.library_path, "keep_dir": self.keep_dir, "startup_timeout_s": self.startup_timeout_s}

    def __setstate__(self, state: dict) -> None:
        self.__init__(**state)

    def start(self) -> str:
        """Start the worker now (it starts on first use otherwise); returns ngspice's version."""
        with self._lock:
            return self._worker().version

    def _worker(self) -> _Worker:
        worker = self._holder.get("worker")
        if worker is None or worker is self._abandoned or not worker.alive():  # killed by abort(): maybe not reaped yet
            if worker is not None:
                _stop_worker(self._holder)
            self._holder["worker"] = _Worker(self.library_path, self.startup_timeout_s)
        return self._holder["worker"]

    def close(self) -> None:
        """Stop the worker process."""
        with self._lock:
            _stop_worker(self._holder)

    def abort(self) -> None:
        """Stop the job that another thread is running, at once: its ``run`` raises SimulationError
        (keeping no deck) and the next job starts a fresh worker. Does nothing when no job runs.

        A job counts from the moment its ``run`` is called, before its worker has it: an abort then
        (the worker being started, the request not yet written) abandons it too.
        """
        with self._jobs_lock:
            self._aborted |= self._jobs
        worker = self._holder.get("worker")
        if worker is not None and worker.alive():
            self._abandoned = worker
            worker.process.kill()

    def _abandoned_error(self, job: SimJob) -> SimulationError:
        _stop_worker(self._holder)
        return SimulationError("the job was abandoned (abort)", corner=job.label or None)

    def run(self, job: SimJob) -> SimResult:
        self.refuse_malformed(job)
        job = _portable(job)
        token = object()  # stands for this job in abort()
        with self._jobs_lock:
            self._jobs.add(token)
        try:
            with self._lock:
                return self._run_held(job, token)
        finally:
            with self._jobs_lock:
                self._jobs.discard(token)
                self._aborted.discard(token)

    def _run_held(self, job: SimJob, token: object) -> SimResult:
        """The job, with the simulator's lock held (run); ``token`` stands for it in abort()."""
        worker = self._worker()
        if token in self._aborted:  # aborted before its request reached the worker
            raise self._abandoned_error(job)
        try:
            reply = worker.call(("run", job), job.timeout_s)
        except FrameTimeout as exc:
            _stop_worker(self._holder)
            deck = keep_deck(runnable_deck(job, None), job.label, self.keep_dir)
            raise SimulationError(
                f"ngspice did not finish within the timeout of {job.timeout_s:g} s; the worker was stopped "
                "and is restarted for the next job",
                deck_path=deck,
                corner=job.label or None,
            ) from exc
        except (WorkerGone, BrokenPipeError, OSError) as exc:
            if token in self._aborted:
                raise self._abandoned_error(job) from exc
            log_tail = worker.log_tail()
            _stop_worker(self._holder)
            deck = keep_deck(runnable_deck(job, None), job.label, self.keep_dir)
            raise SimulationError(
                "the ngspice worker process died during the job (it is restarted for the next job)"
                + (f"; its last output: {log_tail}" if log_tail else ""),
                deck_path=deck,
                simulator_output=log_tail,
                corner=job.label or None,
            ) from exc
        except BaseException:
            _stop_worker(self._holder)  # e.g. KeyboardInterrupt: a reply may still come; never read it later
            raise
        if reply[0] == "failed":
            # ngspice may be left unusable ("cannot recover and awaits to be detached"): start afresh
            _stop_worker(self._holder)
        return self._result(job, reply)

    def _result(self, job: SimJob, reply: tuple) -> SimResult:
        if reply[0] == "failed":
            _, kind, message, output, aid, tried = reply
            raise job_error(job, kind, message, output, runnable_deck(job, aid), self.keep_dir, tried)
        payload = reply[1]
        deck_path = keep_deck(runnable_deck(job, payload.aid), job.label, self.keep_dir) if self.keep_dir is not None else None
        saves = tuple(save_key(s) for s in job.save)
        runs = tuple(RunResult(name=name, freq_hz=freq, vectors=dict(zip(saves, rows))) for name, freq, rows in payload.runs)
        return SimResult(
            runs=runs,
            operating_point=payload.operating_point,
            log=payload.log,
            deck_path=deck_path,
            convergence_aid=payload.found_by,
            backend=self.backend,
            parameters=payload.parameters,
            loaded=payload.loaded,
            ngspice_seconds=payload.ngspice_seconds,
        )

    def operating_point(self, netlist: str) -> Mapping[str, float]:
        """Every node voltage of ``netlist``'s operating point (lower-case, hierarchical as ngspice names them)."""
        return self.run(SimJob(netlist=netlist, runs=(), save=())).operating_point
