"""Simulators started in the background: a job waits for the start, an abort during the start abandons it, and close() reaches a start still under way."""

from __future__ import annotations

import threading

import pytest

from netloop.errors import SimulationError
from netloop.sim import AcRun, AcSweep, SimJob
from netloop.sim.background import StartingSimulator, run_while


class _Slow:
    """A simulator whose start blocks until released; it records what happened to it."""

    backend = "slow"

    def __init__(self, gate: threading.Event, log: list) -> None:
        self.log = log
        gate.wait(5)
        log.append("started")

    def run(self, job):
        self.log.append("ran")
        return "result"

    def close(self):
        self.log.append("closed")


JOB = SimJob(netlist="x\n.end\n", runs=(AcRun("series", {}, (AcSweep("dec", 10, 1.0, 10.0),)),), save=())


def test_a_job_waits_for_the_start_and_close_closes_it():
    """run() returns the started simulator's result; closing afterwards closes that simulator."""
    gate, log = threading.Event(), []
    sim = StartingSimulator(start=lambda keep_dir: _Slow(gate, log))
    gate.set()
    assert sim.run(JOB) == "result"
    sim.close()
    sim.close()  # a second close closes nothing again
    assert log == ["started", "ran", "closed"]


def test_close_before_the_start_finishes_closes_it_when_it_does():
    """A simulator closed while still starting is closed the moment its start ends, and never runs."""
    gate, log = threading.Event(), []
    sim = StartingSimulator(start=lambda keep_dir: _Slow(gate, log))
    sim.close()
    gate.set()
    sim._first.result(5)  # noqa: SLF001 - wait for the background start to end
    assert log == ["started", "closed"]


def test_an_abort_during_the_start_abandons_the_job():
    """A job whose run() was called while ngspice still starts is abandoned by abort(): it never reaches the simulator."""
    gate, log = threading.Event(), []
    sim = StartingSimulator(start=lambda keep_dir: _Slow(gate, log))

    def check_fails():
        sim.abort()  # as measure does when the node is on no loop
        gate.set()
        raise LookupError("no loop here")

    with pytest.raises(LookupError):
        run_while(sim, JOB, check_fails)
    assert "ran" not in log
    sim.close()


def test_run_while_gives_both_results():
    """run_while returns the job's result and what the caller's work gave."""
    gate, log = threading.Event(), []
    gate.set()
    sim = StartingSimulator(start=lambda keep_dir: _Slow(gate, log))
    assert run_while(sim, JOB, lambda: 42) == ("result", 42)
    sim.close()


def test_a_failed_start_raises_at_the_first_run():
    """A start that failed raises its own error when a job needs the simulator."""
    def broken(keep_dir):
        raise SimulationError("ngspice would not start")

    sim = StartingSimulator(start=broken)
    with pytest.raises(SimulationError, match="would not start"):
        sim.run(JOB)
    sim.close()


class _Blocking:
    """A started simulator whose job runs until abort() stops it, as SharedLibrarySimulator's does when its worker is killed."""

    backend = "blocking"

    def __init__(self) -> None:
        self.running, self.stopped = threading.Event(), threading.Event()

    def run(self, job):
        self.running.set()
        self.stopped.wait(5)
        return "late result"

    def abort(self):
        self.stopped.set()

    def close(self):
        pass


def test_an_abort_during_a_job_stops_the_started_simulator_and_abandons_the_job():
    """abort() while a job runs on the started simulator reaches that simulator's own abort() (which stops ngspice at
    once), and the job's run() raises SimulationError rather than hand back what the stopped simulator returned."""
    blocking = _Blocking()
    sim = StartingSimulator(start=lambda keep_dir: blocking)
    outcome: list = []

    def run():
        try:
            outcome.append(sim.run(JOB))
        except SimulationError as exc:
            outcome.append(exc)

    thread = threading.Thread(target=run)
    thread.start()
    assert blocking.running.wait(5)
    sim.abort()
    assert blocking.stopped.is_set()  # reached at once, not after the job's 5 s
    thread.join(5)
    assert isinstance(outcome[0], SimulationError) and str(outcome[0]) == "the job was abandoned (abort)"
    sim.close()


def test_use_processes_starts_the_others_and_shares_each_job_among_them():
    """use_processes(3) starts two more simulators in the background, so three share the runs; the backend named is the
    first one's. Once the simulators have started, asking for more starts none."""
    gate, log = threading.Event(), []
    gate.set()
    sim = StartingSimulator(start=lambda keep_dir: _Slow(gate, log))
    sim.use_processes(3)
    assert len(sim.simulators) == 3 and log.count("started") == 3
    assert sim.backend == "slow"
    sim.use_processes(5)
    assert len(sim.simulators) == 3 and log.count("started") == 3
    sim.close()
    assert log.count("closed") == 3


def test_one_process_asked_for_starts_no_other():
    """use_processes(1) keeps the one simulator: every job goes to it whole."""
    gate, log = threading.Event(), []
    gate.set()
    sim = StartingSimulator(start=lambda keep_dir: _Slow(gate, log))
    sim.use_processes(1)
    assert sim.simulators == (sim.ready(),) and log == ["started"]
    assert sim.backend == "slow"
    sim.close()


def test_a_failed_start_of_a_second_process_closes_the_first():
    """With use_processes(2), a second ngspice that fails to start fails the first run with its own error, and the first
    one, which did start, is closed (no process left behind); closing afterwards closes nothing twice."""
    gate, log = threading.Event(), []
    gate.set()
    starts = iter([lambda: _Slow(gate, log), lambda: (_ for _ in ()).throw(SimulationError("second ngspice would not start"))])
    sim = StartingSimulator(start=lambda keep_dir: next(starts)())
    sim.use_processes(2)
    with pytest.raises(SimulationError, match="second ngspice would not start"):
        sim.run(JOB)
    assert log == ["started", "closed"]
    sim.close()
    assert log == ["started", "closed"]
