"""Ctrl-C during a run (netloop.jobs.corners.interrupt): the first asks the work to stop and keeps what finishes, the
second stops at once; the workers a local cluster starts ignore it, so that only netloop decides. The signal is raised
for real (signal.raise_signal, the handler Python runs in the main thread); child processes report their own handler."""

from __future__ import annotations

import logging
import signal
import subprocess
import sys

import pytest

from netloop.jobs.corners import worker
from netloop.jobs.corners.interrupt import dask_setup, first_stops, ignoring_interrupts

_REPORT_HANDLER = "import signal; print(signal.getsignal(signal.SIGINT))"


def test_the_first_interrupt_asks_to_stop_and_the_second_raises():
    before = signal.getsignal(signal.SIGINT)
    calls = []
    with pytest.raises(KeyboardInterrupt):
        with first_stops(lambda: calls.append("stop")) as stopped:
            assert not stopped.is_set()
            signal.raise_signal(signal.SIGINT)
            assert stopped.is_set() and calls == ["stop"]  # no exception: the run goes on to collect what finishes
            signal.raise_signal(signal.SIGINT)
            pytest.fail("the second Ctrl-C did not stop the run")  # pragma: no cover
    assert calls == ["stop"]
    assert signal.getsignal(signal.SIGINT) is before


def test_a_run_left_alone_restores_the_handler_untouched():
    before = signal.getsignal(signal.SIGINT)
    with first_stops(lambda: None) as stopped:
        assert signal.getsignal(signal.SIGINT) is not before
    assert not stopped.is_set() and signal.getsignal(signal.SIGINT) is before


def test_processes_started_while_ignoring_interrupts_ignore_them_and_later_ones_do_not():
    """An ignored signal stays ignored across exec, and Python then installs no handler of its own: the disposition the
    local cluster's worker processes start with."""
    before = signal.getsignal(signal.SIGINT)
    if before is signal.SIG_IGN:  # a shell's background job starts so: let this process handle it, as a terminal's does
        signal.signal(signal.SIGINT, signal.default_int_handler)
    try:
        with ignoring_interrupts():
            inside = subprocess.run([sys.executable, "-c", _REPORT_HANDLER], capture_output=True, text=True, check=True).stdout
            assert signal.getsignal(signal.SIGINT) is signal.SIG_IGN
        after = subprocess.run([sys.executable, "-c", _REPORT_HANDLER], capture_output=True, text=True, check=True).stdout
        assert signal.getsignal(signal.SIGINT) is signal.default_int_handler
    finally:
        signal.signal(signal.SIGINT, before)
    assert inside.strip() == str(signal.SIG_IGN)
    assert after.strip() == str(signal.default_int_handler)


def test_the_worker_preload_ignores_interrupts(monkeypatch):
    """dask_setup, every local worker's preload (LOCAL_CLUSTER_CONFIG), ignores SIGINT in the process it runs in."""
    from netloop.jobs.corners.runner import LOCAL_CLUSTER_CONFIG

    assert LOCAL_CLUSTER_CONFIG["distributed.worker.preload"] == ["netloop.jobs.corners.interrupt"]
    set_to = []
    monkeypatch.setattr(signal, "signal", lambda signum, handler: set_to.append((signum, handler)))
    worker_log = logging.getLogger("distributed.worker")
    monkeypatch.setattr(worker_log, "filters", [])  # the preload's filter goes into this copy, restored after the test
    dask_setup(object())
    assert set_to == [(signal.SIGINT, signal.SIG_IGN)] and len(worker_log.filters) == 1


def test_a_local_worker_shows_no_traceback_for_a_heartbeat_that_finds_the_scheduler_closed(monkeypatch, caplog):
    """The record Dask logs, with its traceback, when a worker's heartbeat finds the scheduler gone (distributed.worker:
    'Failed to communicate with scheduler during heartbeat.', its words in distributed 2024-2025) is dropped in a local
    cluster's worker; netloop closes that scheduler when a run ends or is stopped, and the traceback came out under
    netloop's last line of a Ctrl-C (tests/jobs/statistics/test_interrupt_run.py, now and then). Any other record of the
    worker passes, once the filter is in twice as once."""
    from netloop.jobs.corners.interrupt import quiet_heartbeats

    worker_log = logging.getLogger("distributed.worker")
    monkeypatch.setattr(worker_log, "filters", [])
    quiet_heartbeats()
    quiet_heartbeats()
    assert len(worker_log.filters) == 1
    with caplog.at_level(logging.ERROR, logger="distributed.worker"):
        try:
            raise OSError("Timed out trying to connect to tcp://127.0.0.1:40123")
        except OSError:
            worker_log.exception("Failed to communicate with scheduler during heartbeat.")
            worker_log.exception("Unexpected exception during heartbeat. Closing worker.")
    assert [r.getMessage() for r in caplog.records] == ["Unexpected exception during heartbeat. Closing worker."]


def test_a_stopped_chunk_hands_back_what_it_measured_and_starts_nothing_more(monkeypatch):
    """run_chunk measures its tasks in order; once its run is stopped (stop_run, as the client calls it on every worker),
    the task in progress finishes and is handed back with those before it, and no further task starts. Another run's
    chunks go on."""
    started = []

    def measured(task, options, netlists=None):
        started.append(task)
        if task == "b":
            worker.stop_run("run-1")  # arrives while b is being measured
        return ({"corner": task},)

    monkeypatch.setattr(worker, "run_task", measured)
    monkeypatch.setattr(worker, "_STOPPED", set())
    assert worker.run_chunk(("a", "b", "c", "d"), options=None, run="run-1") == (({"corner": "a"},), ({"corner": "b"},))
    assert started == ["a", "b"]
    assert worker.run_chunk(("e", "f"), options=None, run="run-1") == ()  # queued after the stop: returns at once
    assert worker.run_chunk(("g", "h"), options=None, run="run-2") == (({"corner": "g"},), ({"corner": "h"},))
    assert worker.run_chunk(("i",), options=None) == (({"corner": "i"},),)  # outside a run (no name): never stopped
