"""The worker process: a hung or dead ngspice costs one job, never netloop or the next job."""

from __future__ import annotations

import os
import signal

import numpy as np
import pytest

from netloop.errors import SimulationError, SimulatorUnavailableError
from netloop.sim import AcRun, AcSweep, SharedLibrarySimulator, SimJob

RC = "rc\nv1 in 0 dc 0 ac 1\nr1 in out 1k\nc1 out 0 1n\n"
RC_JOB = SimJob(RC, runs=(AcRun("a", {"v1": 1.0}, (AcSweep("dec", 3, 1e3, 1e6),)),), save=("v(out)",), excitable=("v1",))


def _slow_job(timeout_s: float) -> SimJob:
    # A 300-section RC ladder on 2 million frequency points takes tens of seconds in ngspice.
    lines = ["slow ladder", "v1 n0 0 dc 0 ac 1"]
    lines += [f"r{i} n{i} n{i + 1} 1k\nc{i} n{i + 1} 0 1p" for i in range(300)]
    sweep = (AcSweep("lin", 2_000_000, 1.0, 1e9),)
    return SimJob("\n".join(lines), runs=(AcRun("slow", {"v1": 1.0}, sweep),), save=("v(n300)",), label="hang", timeout_s=timeout_s)


def _check_rc(result) -> None:
    run = result.run("a")
    expected = 1 / (1 + 2j * np.pi * run.freq_hz * 1e3 * 1e-9)  # circuit theory: RC low-pass, closed form
    np.testing.assert_allclose(run.vectors["v(out)"], expected, rtol=1e-9)


@pytest.mark.ngspice
def test_timeout_stops_the_worker_and_the_next_job_runs(tmp_path):
    """A job over its timeout raises SimulationError naming the timeout and keeping the deck; the
    next job on the same simulator runs in a restarted worker and is right."""
    with SharedLibrarySimulator(keep_dir=tmp_path) as simulator:
        first_pid = simulator._holder["worker"].process.pid if simulator.start() else None
        with pytest.raises(SimulationError, match=r"timeout of 0.5 s") as caught:
            simulator.run(_slow_job(0.5))
        assert caught.value.corner == "hang" and os.path.isfile(caught.value.deck_path)
        _check_rc(simulator.run(RC_JOB))
        assert simulator._holder["worker"].process.pid != first_pid


@pytest.mark.ngspice
def test_killed_worker_is_reported_and_replaced():
    """If the worker dies (here: killed), the job raises SimulationError saying so and the next job works."""
    with SharedLibrarySimulator() as simulator:
        _check_rc(simulator.run(RC_JOB))
        worker = simulator._holder["worker"]
        os.kill(worker.process.pid, signal.SIGKILL)
        worker.process.wait()
        # The dead worker is noticed before sending: the job runs in a fresh one.
        _check_rc(simulator.run(RC_JOB))
        # Dying during a job is reported as such.
        simulator.start()
        pid = simulator._holder["worker"].process.pid
        job = _slow_job(60.0)
        import threading  # noqa: PLC0415

        timer = threading.Timer(0.5, os.kill, (pid, signal.SIGKILL))
        timer.start()
        try:
            with pytest.raises(SimulationError, match="worker process died"):
                simulator.run(job)
        finally:
            timer.cancel()
        _check_rc(simulator.run(RC_JOB))


@pytest.mark.ngspice
def test_batch_timeout(batch_sim):
    """Batch mode stops ngspice at the job's timeout and says so."""
    with pytest.raises(SimulationError, match=r"timeout of 0.5 s"):
        batch_sim.run(_slow_job(0.5))
    _check_rc(batch_sim.run(RC_JOB))


def test_unloadable_library_is_unavailable(tmp_path):
    """A file that is not libngspice gives SimulatorUnavailableError with install instructions."""
    bogus = tmp_path / "libngspice.so"
    bogus.write_bytes(b"not a shared library")
    with pytest.raises(SimulatorUnavailableError, match="apt-get install"):
        SharedLibrarySimulator(library_path=str(bogus)).start()


@pytest.mark.ngspice
def test_read_only_mappings_cross_to_the_worker(shared_sim):
    """A run whose AC settings are a read-only mapping (MappingProxyType) is sent and simulated alike."""
    from types import MappingProxyType  # noqa: PLC0415

    job = SimJob(RC, runs=(AcRun("a", MappingProxyType({"v1": 1.0}), (AcSweep("dec", 3, 1e3, 1e6),)),), save=("v(out)",))
    _check_rc(shared_sim.run(job))


@pytest.mark.ngspice
def test_simulator_pickles_to_a_working_copy(shared_sim):
    """A pickled shared-library simulator (as process pools send it) arrives as a working simulator
    with its own worker."""
    import pickle  # noqa: PLC0415

    shared_sim.start()
    copy = pickle.loads(pickle.dumps(shared_sim))
    try:
        _check_rc(copy.run(RC_JOB))
        assert copy._holder["worker"].process.pid != shared_sim._holder["worker"].process.pid
    finally:
        copy.close()


@pytest.mark.ngspice
def test_a_deck_with_multibyte_characters_reaches_ngspice_intact(shared_sim):
    """A title and a comment in UTF-8 with multi-byte characters ahead of the elements: every line reaches ngspice
    whole (the lines are handed over as byte offsets into one buffer), so the RC low-pass matches its closed form."""
    netlist = "filtre µ-passe-bas — réseau RC (ünïcode)\n* commentaire: élément résistif ↓\nv1 in 0 dc 0 ac 1\nr1 in out 1k\nc1 out 0 1n\n"
    job = SimJob(netlist, runs=(AcRun("a", {"v1": 1.0}, (AcSweep("dec", 5, 1e3, 1e7),)),), save=("v(out)",), excitable=("v1",))
    run = shared_sim.run(job).run("a")
    expected = 1 / (1 + 2j * np.pi * run.freq_hz * 1e3 * 1e-9)  # circuit theory: RC low-pass, closed form
    np.testing.assert_allclose(run.vectors["v(out)"], expected, rtol=1e-9)
