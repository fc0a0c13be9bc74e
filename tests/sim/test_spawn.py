"""A worker process started ahead is the one the first simulator takes; one that no simulator takes is stopped."""

from __future__ import annotations

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
