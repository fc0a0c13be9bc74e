"""SharedLibrarySimulator.abort: a job running in another thread stops at once and the next job runs."""

from __future__ import annotations

import threading

import numpy as np
import pytest

from netloop.errors import SimulationError
from netloop.sim import AcRun, AcSweep, SharedLibrarySimulator, SimJob

pytestmark = pytest.mark.ngspice

RC = "rc\nv1 in 0 dc 0 ac 1\nr1 in out 1k\nc1 out 0 1n\n"
RC_JOB = SimJob(RC, runs=(AcRun("a", {"v1": 1.0}, (AcSweep("dec", 3, 1e3, 1e6),)),), save=("v(out)",), excitable=("v1",))


def _long_job() -> SimJob:
    # 400 RC sections on a million frequency points: ngspice works on it for many seconds.
    lines = ["long ladder", "v1 n0 0 dc 0 ac 1"]
    lines += [f"r{i} n{i} n{i + 1} 1k\nc{i} n{i + 1} 0 1p" for i in range(400)]
    runs = (AcRun("long", {"v1": 1.0}, (AcSweep("lin", 1_000_000, 1.0, 1e9),)),)
    return SimJob("\n".join(lines), runs=runs, save=("v(n400)",), label="long", timeout_s=300.0)


def test_abort_stops_a_running_job_and_the_next_job_runs(tmp_path):
    """abort() from another thread makes the running job raise SimulationError (no deck kept) and the next job runs right in a new worker."""
    with SharedLibrarySimulator(keep_dir=tmp_path) as simulator:
        simulator.start()
        first_pid = simulator._holder["worker"].process.pid
        outcome: list[BaseException] = []

        def run_long() -> None:
            try:
                simulator.run(_long_job())
            except BaseException as exc:  # noqa: BLE001 - handed to the test thread
                outcome.append(exc)

        runner = threading.Thread(target=run_long)
        runner.start()
        while simulator._lock.acquire(blocking=False):  # wait until the job holds the simulator
            simulator._lock.release()
        simulator.abort()
        runner.join(120)
        assert not runner.is_alive()
        assert len(outcome) == 1 and isinstance(outcome[0], SimulationError)
        assert "abandoned" in str(outcome[0]) and outcome[0].deck_path is None
        assert outcome[0].corner == _long_job().label  # the job's label: the corner whose record says so
        assert list(tmp_path.iterdir()) == []  # keep_dir: the abandoned job left no deck
        run = simulator.run(RC_JOB).run("a")
        expected = 1 / (1 + 2j * np.pi * run.freq_hz * 1e3 * 1e-9)  # circuit theory: RC low-pass, closed form
        np.testing.assert_allclose(run.vectors["v(out)"], expected, rtol=1e-9)
        assert simulator._holder["worker"].process.pid != first_pid


def test_abort_without_a_worker_does_nothing():
    """abort() on a simulator whose worker has not started leaves it usable: the next job is right."""
    with SharedLibrarySimulator() as simulator:
        simulator.abort()
        run = simulator.run(RC_JOB).run("a")
        expected = 1 / (1 + 2j * np.pi * run.freq_hz * 1e3 * 1e-9)  # circuit theory: RC low-pass, closed form
        np.testing.assert_allclose(run.vectors["v(out)"], expected, rtol=1e-9)


@pytest.mark.parametrize("when", ["before the worker is found", "after the worker is found"])
def test_abort_while_a_job_is_being_set_up_abandons_it(when):
    """An abort that arrives once a job holds the simulator but before its request reaches the worker (the worker
    being started or found) abandons that job all the same, instead of letting it run to its end; the next job runs."""
    with SharedLibrarySimulator() as simulator:
        simulator.start()
        found = simulator._worker

        def worker_with_abort():
            if when.startswith("before"):
                killed = simulator._holder["worker"].process
                simulator.abort()
                killed.wait()  # gone for sure: found() starts a new worker, which the job must not then run on
                return found()
            worker = found()
            simulator.abort()
            return worker

        simulator._worker = worker_with_abort
        with pytest.raises(SimulationError, match="abandoned"):
            simulator.run(RC_JOB)
        simulator._worker = found
        run = simulator.run(RC_JOB).run("a")
        expected = 1 / (1 + 2j * np.pi * run.freq_hz * 1e3 * 1e-9)  # circuit theory: RC low-pass, closed form
        np.testing.assert_allclose(run.vectors["v(out)"], expected, rtol=1e-9)


def test_abort_between_jobs_leaves_the_next_job_alone():
    """An abort with no job running stops the idle worker only: the next job starts a new one and runs right."""
    with SharedLibrarySimulator() as simulator:
        simulator.run(RC_JOB)
        simulator.abort()
        run = simulator.run(RC_JOB).run("a")
        expected = 1 / (1 + 2j * np.pi * run.freq_hz * 1e3 * 1e-9)  # circuit theory: RC low-pass, closed form
        np.testing.assert_allclose(run.vectors["v(out)"], expected, rtol=1e-9)
