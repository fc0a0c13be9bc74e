"""The worker process: a hung or dead ngspice costs one job, never netloop or the next job."""

from __future__ import annotations

import os
import signal
from pathlib import Path

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
            with pytest.raises(SimulationError, match="worker process died") as died:
                simulator.run(job)
            assert died.value.corner == "hang"  # the job's label: the corner whose record says so
        finally:
            timer.cancel()
        _check_rc(simulator.run(RC_JOB))


@pytest.mark.ngspice
def test_batch_timeout(batch_sim):
    """Batch mode stops ngspice at the job's timeout and says so."""
    with pytest.raises(SimulationError, match=r"timeout of 0.5 s"):
        batch_sim.run(_slow_job(0.5))
    result = batch_sim.run(RC_JOB)
    _check_rc(result)
    assert result.backend == "ngspice-batch"  # what the results say ran the job


def test_unloadable_library_is_unavailable(tmp_path):
    """A file that is not libngspice gives SimulatorUnavailableError with install instructions."""
    bogus = tmp_path / "libngspice.so"
    bogus.write_bytes(b"not a shared library")
    with pytest.raises(SimulatorUnavailableError, match="apt-get install") as caught:
        SharedLibrarySimulator(library_path=str(bogus)).start()
    assert f"libngspice at {bogus} cannot be loaded: OSError: " in str(caught.value)  # the system's refusal, by its kind


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


def test_the_log_tail_is_the_worker_s_last_lines(tmp_path):
    """What a failed job quotes of the worker's log: its last lines (blank ones left out), one a line, as written; nothing
    when the log is gone."""
    from netloop.sim.shared import _Worker  # noqa: PLC0415

    worker = object.__new__(_Worker)  # the log alone: no process started
    worker.log_path = tmp_path / "worker.log"
    worker.log_path.write_text("started\n\n   \nError: cannot recover\nngspice stopped\n")
    assert worker.log_tail() == "started\nError: cannot recover\nngspice stopped"
    assert worker.log_tail(2) == "Error: cannot recover\nngspice stopped"
    worker.log_path.unlink()
    assert worker.log_tail() == ""


@pytest.mark.ngspice
def test_the_worker_speaks_its_protocol(tmp_path):
    """The worker process as netloop.sim.worker.main runs it: "ready" with ngspice's version; a job's vectors (the RC
    closed form); a request it does not know refused with its reason, the worker still serving; a deck ngspice cannot
    read refused as a netlist failure with ngspice's words; the end of its input ends it with status 0."""
    import subprocess  # noqa: PLC0415
    import sys  # noqa: PLC0415

    from netloop.sim import find_libngspice  # noqa: PLC0415
    from netloop.sim.protocol import read_frame_fd, write_frame  # noqa: PLC0415
    from netloop.sim.shared import _portable  # noqa: PLC0415
    from sim_decks import same_netloop  # noqa: PLC0415

    code = "import sys; from netloop.sim.worker import main; sys.exit(main(sys.argv))"  # the module by its name, as mutmut sees it
    with open(tmp_path / "worker.log", "wb") as err:
        worker = subprocess.Popen([sys.executable, "-c", code, find_libngspice()], stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                  stderr=err, cwd=tmp_path, env=same_netloop())
    replies = worker.stdout.fileno()

    def ask(request):
        write_frame(worker.stdin, request)
        return read_frame_fd(replies, 60)

    try:
        ready, version = read_frame_fd(replies, 60)
        assert ready == "ready" and version
        kind, payload = ask(("run", _portable(RC_JOB)))
        assert kind == "ok"
        name, freq, (v_out,) = payload.runs[0]
        np.testing.assert_allclose(v_out, 1 / (1 + 2j * np.pi * freq * 1e3 * 1e-9), rtol=1e-9)  # circuit theory: RC low-pass
        assert ask(("bogus", None))[:3] == ("failed", "internal", "ValueError: unknown request 'bogus'")
        broken = _portable(SimJob("broken\nv1 in 0 dc 0 ac 1\nq1 in out\n", runs=RC_JOB.runs, save=("v(in)",), excitable=("v1",)))
        failed = ask(("run", broken))
        assert failed[:2] == ("failed", "netlist") and failed[2].startswith("ngspice could not read the netlist")
        kind, payload = ask(("run", _portable(RC_JOB)))  # still serving
        assert kind == "ok" and payload.runs[0][1].size == freq.size
        worker.stdin.close()
        assert worker.wait(30) == 0
    finally:
        if worker.poll() is None:
            worker.kill()
            worker.wait()
        worker.stdout.close()
        if not worker.stdin.closed:
            worker.stdin.close()


def test_a_crashing_ngspice_in_batch_mode_is_named_with_its_signal_and_last_lines(tmp_path):
    """An ngspice -b killed by a signal (here a stand-in that prints eight lines and kills itself with SIGSEGV, as a
    crashing ngspice would end) fails the job naming the signal and its last six lines, in order."""
    from netloop.sim import BatchSimulator  # noqa: PLC0415

    crashing = tmp_path / "ngspice"
    crashing.write_text("#!/bin/sh\nfor i in 1 2 3 4 5 6 7 8; do echo \"line $i\"; done\nkill -SEGV $$\n")
    crashing.chmod(0o755)
    with pytest.raises(SimulationError) as caught:
        BatchSimulator(binary=str(crashing)).run(RC_JOB)
    assert f"ngspice crashed (signal {signal.SIGSEGV.value}): " + "\n".join(f"line {i}" for i in range(3, 9)) in str(caught.value)


@pytest.mark.ngspice
def test_batch_mode_runs_a_job_given_under_a_second_and_stops_one_given_no_time(batch_sim):
    """A timeout under a second is still time to run a small job; a job whose time is gone before ngspice could start is
    stopped with the timeout's message, not run."""
    from dataclasses import replace  # noqa: PLC0415

    _check_rc(batch_sim.run(replace(RC_JOB, timeout_s=0.9)))
    with pytest.raises(SimulationError, match=r"did not finish within the timeout of 1e-09 s"):
        batch_sim.run(replace(RC_JOB, timeout_s=1e-9))


@pytest.mark.ngspice
@pytest.mark.parametrize("backend", ["shared", "batch"])
def test_a_kept_deck_is_named_for_its_job_and_runs_in_ngspice_alone(backend, tmp_path):
    """keep_dir keeps each job's deck, named for the job's label, and ngspice -b runs it as it is, with no error line;
    without keep_dir a job that succeeds keeps none."""
    import subprocess  # noqa: PLC0415
    from dataclasses import replace  # noqa: PLC0415

    from netloop.sim import BatchSimulator, find_ngspice_binary  # noqa: PLC0415

    make = SharedLibrarySimulator if backend == "shared" else BatchSimulator
    simulator = make(keep_dir=str(tmp_path / "kept"))
    try:
        result = simulator.run(replace(RC_JOB, label="corner 7/ss"))
        _check_rc(result)
    finally:
        getattr(simulator, "close", lambda: None)()
    (deck,) = (tmp_path / "kept").glob("*.cir")
    assert result.deck_path == str(deck) and deck.name.startswith("corner_7_ss-")
    done = subprocess.run([find_ngspice_binary(), "-b", str(deck)], capture_output=True, text=True, timeout=60, cwd=tmp_path, check=False)
    assert "error" not in (done.stdout + done.stderr).lower() and "ac" in deck.read_text().lower()
    plain = make()
    try:
        assert plain.run(RC_JOB).deck_path is None
    finally:
        getattr(plain, "close", lambda: None)()


@pytest.mark.ngspice
def test_the_session_reports_ngspice_s_own_version():
    """The worker's "ready" names the version of the ngspice it loaded: the number `ngspice -v` prints (ngspice-39 here)."""
    import re  # noqa: PLC0415
    import subprocess  # noqa: PLC0415

    from netloop.sim import find_ngspice_binary  # noqa: PLC0415

    printed = subprocess.run([find_ngspice_binary(), "-v"], capture_output=True, text=True, timeout=30, check=False).stdout
    with SharedLibrarySimulator() as simulator:
        assert simulator.start() == re.search(r"ngspice-(\d+)", printed)[1]


def test_a_batch_ngspice_that_cannot_run_is_unavailable(tmp_path):
    """An ngspice program that cannot be run (here a file without execute permission) makes the job's simulator
    unavailable, naming the program and the system's reason."""
    from netloop.errors import SimulatorUnavailableError as Unavailable  # noqa: PLC0415
    from netloop.sim import BatchSimulator  # noqa: PLC0415

    stuck = tmp_path / "ngspice"
    stuck.write_text("#!/bin/sh\n")
    stuck.chmod(0o644)
    with pytest.raises(Unavailable, match=rf"^cannot run {stuck}: .*Permission denied"):
        BatchSimulator(binary=str(stuck)).run(RC_JOB)


def test_pyspice_s_own_logging_is_silenced():
    """PySpice logs nothing anywhere from a session: its logger is above every level and passes nothing up."""
    import logging  # noqa: PLC0415

    from netloop.sim.session import _silence_pyspice  # noqa: PLC0415

    _silence_pyspice()
    logger = logging.getLogger("PySpice")
    assert logger.level > logging.CRITICAL and not logger.propagate
    assert not logging.getLogger("PySpice.Spice.NgSpice.Shared").isEnabledFor(logging.CRITICAL)


def test_the_package_lists_what_it_offers():
    """dir(netloop.sim) lists its exports, those loaded on first use included (as a REPL's completion reads them)."""
    import netloop.sim as sim  # noqa: PLC0415

    names = dir(sim)
    assert names == sorted(names) and {"SharedLibrarySimulator", "BatchSimulator", "SimJob", "default_simulator"} <= set(names)


@pytest.mark.ngspice
def test_a_library_path_with_braces_loads(tmp_path):
    """libngspice found in a folder whose name holds braces (PySpice formats the path it is given) loads as any other."""
    from netloop.sim import find_libngspice  # noqa: PLC0415

    folder = tmp_path / "ngspice {build} }{"
    folder.mkdir()
    (folder / "libngspice.so").symlink_to(os.path.realpath(find_libngspice()))
    with SharedLibrarySimulator(library_path=str(folder / "libngspice.so")) as simulator:
        assert simulator.start()
        _check_rc(simulator.run(RC_JOB))


@pytest.mark.ngspice
def test_a_worker_that_crashes_is_reported_with_its_last_output(monkeypatch):
    """A worker that dies of a segmentation fault in the middle of a job (as a crashing ngspice would; here the signal is
    sent, with Python's fault handler on so that the dying process writes why) fails the job with the worker's last
    output in the message and in simulator_output, and the next job runs in a new worker."""
    import threading  # noqa: PLC0415

    monkeypatch.setenv("PYTHONFAULTHANDLER", "1")  # the worker process inherits it (netloop.sim.spawn)
    with SharedLibrarySimulator() as simulator:
        simulator.start()
        pid = simulator._holder["worker"].process.pid
        timer = threading.Timer(0.5, os.kill, (pid, signal.SIGSEGV))
        timer.start()
        try:
            with pytest.raises(SimulationError, match="worker process died") as died:
                simulator.run(_slow_job(60.0))
        finally:
            timer.cancel()
        tail = died.value.simulator_output  # the last 20 lines of the fault handler's report: the worker's own stack
        assert 'File "' in tail and "netloop/sim/" in tail and len(tail.splitlines()) <= 20
        assert f"its last output: {died.value.simulator_output}" in str(died.value)
        _check_rc(simulator.run(RC_JOB))


@pytest.mark.ngspice
def test_many_long_saves_all_come_back(shared_sim):
    """Sixty nodes of long names saved at once (over 2,000 characters of names, one of 180: ngspice's shared API takes
    commands of at most 1023) all come back, each with its own value: a ladder of equal resistors divides the 1 V source evenly
    (circuit theory: node k of n sits at 1 - k/n)."""
    n = 60
    names = [f"ladder_node_with_a_rather_long_name_{k}" for k in range(1, n)]
    names[23] = "n" * 180  # a name longer than the room a full command leaves
    nodes = ["in", *names, "0"]
    netlist = "ladder\nv1 in 0 dc 1 ac 1\n" + "".join(f"r{k} {a} {b} 1k\n" for k, (a, b) in enumerate(zip(nodes, nodes[1:]), start=1))
    job = SimJob(netlist, runs=(AcRun("a", {"v1": 1.0}, (AcSweep("lin", 1, 1e3, 1e3),)),), save=tuple(f"v({m})" for m in names),
                 excitable=("v1",))
    assert sum(len(m) + 3 for m in names) > 2 * 1023
    run = shared_sim.run(job).run("a")
    for k, name in enumerate(names, start=1):
        np.testing.assert_allclose(run.vectors[f"v({name})"], [1 - k / n], rtol=1e-12)


def test_a_deck_is_kept_under_its_label_or_as_a_job_and_a_folder_it_cannot_use_is_named(tmp_path):
    """A kept deck's name starts with its label made safe for a file name, or 'job' when it has none; its output sits
    beside it, ending with one newline; a keep_dir not there yet is made, with the folders above it (as 'mkdir -p'
    would: --keep-decks runs/today/decks); a keep_dir that is a file is refused by name."""
    from netloop.errors import OutputError  # noqa: PLC0415
    from netloop.sim.keep import keep_deck, keep_output  # noqa: PLC0415

    assert Path(keep_deck("deck\n", "", tmp_path)).name.startswith("job-")
    assert Path(keep_deck("deck\n", "ss/125C #3", tmp_path)).name.startswith("ss_125C_3-")
    deck = keep_deck("deck\n", "x", tmp_path)
    assert Path(keep_output(deck, "line 1\nline 2\n")).read_text() == "line 1\nline 2\n"
    assert Path(keep_output(deck, "line 1\nline 2")).read_text() == "line 1\nline 2\n"
    nested = tmp_path / "runs" / "today" / "decks"
    kept = Path(keep_deck("deck\n", "x", nested))
    assert kept.parent == nested and kept.read_text() == "deck\n"
    blocked = tmp_path / "a file"
    blocked.write_text("not a folder\n")
    with pytest.raises(OutputError, match=rf"^cannot keep the deck in '{blocked}': "):
        keep_deck("deck\n", "x", blocked)


def test_a_worker_that_never_says_ready_is_unavailable_by_name():
    """A worker that has not said "ready" within the start-up time is stopped, and the error says it did not start and
    why (its log's last lines, or what the wait ended with when the log is empty)."""
    from netloop.errors import SimulatorUnavailableError as Unavailable  # noqa: PLC0415

    with pytest.raises(Unavailable, match=r"^the ngspice worker did not start \(FrameTimeout\); "):
        SharedLibrarySimulator(startup_timeout_s=1e-6).start()


def test_a_frame_that_stops_half_way_gives_up_at_the_deadline():
    """read_frame_fd gives up with FrameTimeout once ``timeout_s`` has passed (its docstring) when a worker has sent part
    of a frame header and then nothing: it neither waits for the rest past the deadline nor gives up before it."""
    import threading  # noqa: PLC0415
    import time  # noqa: PLC0415

    from netloop.sim.protocol import FrameTimeout, read_frame_fd  # noqa: PLC0415

    read_end, write_end = os.pipe()
    outcome: list[object] = []

    def read() -> None:
        started = time.monotonic()
        try:
            read_frame_fd(read_end, 0.3)
        except Exception as exc:  # noqa: BLE001 - what the read ended with is the result
            outcome.append((type(exc), time.monotonic() - started))

    try:
        os.write(write_end, b"\x10\x00\x00")  # 3 of the header's 8 bytes
        reader = threading.Thread(target=read, daemon=True)
        reader.start()
        reader.join(10)
        finished = not reader.is_alive()
    finally:
        os.close(write_end)  # a reader still waiting then sees the end of the pipe and stops
        reader.join(10)
        os.close(read_end)
    assert finished, "still waiting for the rest of the frame long after the deadline"
    (kind, waited_s), = outcome
    assert kind is FrameTimeout and waited_s >= 0.29  # the deadline, less a clock tick
