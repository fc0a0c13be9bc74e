"""Ctrl-C during a run: the first finishes what is in progress and keeps it, the second stops at once.

A terminal sends SIGINT to every process of the foreground group: netloop, the local cluster's Dask workers and their
ngspice processes. The local cluster's workers ignore it (started under `ignoring_interrupts`, and `dask_setup` as the
preload of every worker, one its nanny starts again later included), so that only netloop decides: `first_stops` turns
its first SIGINT into a request to stop, which the runner passes on to the workers, and leaves the second to raise
KeyboardInterrupt as Python does.
"""

from __future__ import annotations

import contextlib
import logging
import signal
import threading
from collections.abc import Callable, Iterator

__all__ = ["dask_setup", "first_stops", "ignoring_interrupts", "quiet_heartbeats"]


def _main_thread() -> bool:
    """Whether signal handlers can be set here: Python delivers signals to the main thread only."""
    return threading.current_thread() is threading.main_thread()


@contextlib.contextmanager
def ignoring_interrupts() -> Iterator[None]:
    """SIGINT ignored while in the block, in this process and in every process it starts meanwhile (an ignored signal
    stays ignored across exec, and Python then installs no handler of its own); nothing outside the main thread."""
    if not _main_thread():
        yield
        return
    before = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, before)


@contextlib.contextmanager
def first_stops(on_first: Callable[[], None]) -> Iterator[threading.Event]:
    """While in the block, the first SIGINT sets the event it yields and calls ``on_first()``, which must return at once
    and write nothing (it starts a thread that stops the work and says so: the main thread may be inside a write to the
    same stream, which Python refuses to enter again from a signal handler); a second raises KeyboardInterrupt. Outside
    the main thread nothing is installed and SIGINT does what it did (the event is never set)."""
    stop = threading.Event()
    if not _main_thread():
        yield stop
        return

    def handler(signum, frame):
        if stop.is_set():
            raise KeyboardInterrupt
        stop.set()
        on_first()

    before = signal.signal(signal.SIGINT, handler)
    try:
        yield stop
    finally:
        signal.signal(signal.SIGINT, before)


def dask_setup(worker) -> None:
    """A Dask worker preload (LOCAL_CLUSTER_CONFIG names this module): the worker process ignores SIGINT, as those started
    under `ignoring_interrupts` do; for a worker the local cluster's nanny starts again after a crash, when netloop's own
    handler is back. A worker process runs its event loop, and so its preloads, on its main thread."""
    if _main_thread():
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    quiet_heartbeats()


_HEARTBEAT_LOST = "Failed to communicate with scheduler during heartbeat"  # distributed.worker's words


class _SchedulerGone(logging.Filter):
    """Drops Dask's error record of a heartbeat that found the scheduler gone."""

    def filter(self, record: logging.LogRecord) -> bool:
        return not record.getMessage().startswith(_HEARTBEAT_LOST)


_FILTER = _SchedulerGone()


def quiet_heartbeats() -> None:
    """In a local cluster's worker: Dask's error, with its traceback, when a heartbeat finds the scheduler closed is not
    shown. netloop closes that scheduler itself when a run ends or is stopped (Ctrl-C), and a worker whose heartbeat was
    under way then wrote a traceback under netloop's last line; a scheduler lost in the middle of a run is reported by
    the run itself (its tasks fail, and their corners are recorded as errors). Other records pass."""
    logger = logging.getLogger("distributed.worker")
    if _FILTER not in logger.filters:
        logger.addFilter(_FILTER)
