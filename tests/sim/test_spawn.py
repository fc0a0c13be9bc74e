"""A worker process started ahead is the one the first simulator takes; one that no simulator takes is stopped."""

from __future__ import annotations

import time
from pathlib import Path

import pytest

from netloop.sim import SharedLibrarySimulator, find_libngspice
from netloop.sim import spawn as spawn_module

pytestmark = pytest.mark.ngspice


def test_the_first_simulator_takes_the_process_started_ahead():
    """start_ahead starts one worker process; the next shared-library simulator runs on that very process (same pid)
    and none is left waiting."""
    spawn_module.start_ahead()
    waiting = spawn_module._AHEAD[0].process
    simulator = SharedLibrarySimulator()
    try:
        simulator.start()
        assert simulator._holder["worker"].process.pid == waiting.pid
        assert spawn_module._AHEAD == []
        assert simulator.operating_point("rc\nv1 a 0 dc 2\nr1 a b 1k\nr2 b 0 1k\n")["b"] == pytest.approx(1.0)
    finally:
        simulator.close()


def test_a_process_no_simulator_takes_is_stopped():
    """discard stops a worker process started ahead and never taken (its exit status is set), and leaves nothing waiting."""
    spawn_module.start_ahead()
    waiting = spawn_module._AHEAD[0].process
    spawn_module.discard()
    assert waiting.poll() is not None
    assert spawn_module._AHEAD == []


def test_a_process_started_elsewhere_is_not_taken(tmp_path, monkeypatch):
    """A process started ahead in another folder (ngspice reads .spiceinit from it) is not taken by a simulator here."""
    spawn_module.start_ahead()
    monkeypatch.chdir(tmp_path)
    assert spawn_module.take(find_libngspice()) is None
    spawn_module.discard()


def test_a_process_started_with_another_import_path_is_not_taken(monkeypatch):
    """A process started ahead imports netloop as the caller's PYTHONPATH then said; once it says otherwise (another
    netloop, or other model code, to be imported), that process is not taken: the next simulator starts its own."""
    monkeypatch.setenv("PYTHONPATH", "/first/place")
    spawn_module.start_ahead()
    monkeypatch.setenv("PYTHONPATH", "/second/place")
    try:
        assert spawn_module.take(find_libngspice()) is None
        monkeypatch.setenv("PYTHONPATH", "/first/place")
        taken = spawn_module.take(find_libngspice())  # the same environment again: taken
        assert taken is not None
        taken.stop()
    finally:
        spawn_module.discard()


def test_a_process_started_ahead_for_a_netlist_is_told_which(tmp_path, monkeypatch):
    """start_ahead(netlist) gives the worker the netlist's absolute path (its environment, as Linux shows it in
    /proc/PID/environ), where it reads the model libraries while the caller reads the netlist; without one the worker
    is given none, even when the caller's own environment names one; the simulator still takes that process."""
    monkeypatch.chdir(tmp_path)
    (tmp_path / "amp.cir").write_text("amp\nv1 a 0 dc 2\nr1 a b 1k\nr2 b 0 1k\n")
    monkeypatch.setenv(spawn_module.WARM_ENV, "/elsewhere.cir")
    for warm, told in (("amp.cir", str(tmp_path / "amp.cir")), (None, None)):
        spawn_module.start_ahead(warm)
        waiting = spawn_module._AHEAD[0].process
        raw = ""
        for _ in range(200):  # the kernel shows the new image's environment only once exec has set it up: read again until it does
            raw = (Path("/proc") / str(waiting.pid) / "environ").read_bytes().decode()
            if "=" in raw:
                break
            time.sleep(0.01)
        environ = dict(e.split("=", 1) for e in raw.split("\0") if "=" in e)
        assert environ.get(spawn_module.WARM_ENV) == told
        simulator = SharedLibrarySimulator()
        try:
            simulator.start()
            assert simulator._holder["worker"].process.pid == waiting.pid
        finally:
            simulator.close()
