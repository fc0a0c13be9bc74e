"""Which backend default_simulator picks, and what happens when ngspice is missing."""

from __future__ import annotations

import pytest

import netloop.sim as sim
from netloop.errors import SimulatorUnavailableError


@pytest.mark.ngspice
def test_default_is_the_shared_library():
    """With libngspice installed the default backend is the shared-library worker."""
    simulator = sim.default_simulator()
    try:
        assert isinstance(simulator, sim.SharedLibrarySimulator)
        assert sim.find_libngspice() is not None
    finally:
        simulator.close()


@pytest.mark.ngspice
def test_falls_back_to_batch_when_the_library_cannot_load(monkeypatch, tmp_path):
    """A libngspice that cannot be loaded makes default_simulator fall back to batch mode."""
    bogus = tmp_path / "libngspice.so"
    bogus.write_bytes(b"\x7fELF but not really")
    monkeypatch.setattr(sim, "find_libngspice", lambda: str(bogus))
    monkeypatch.setattr("netloop.sim.shared.find_libngspice", lambda: str(bogus))
    simulator = sim.default_simulator()
    assert isinstance(simulator, sim.BatchSimulator)


def test_nothing_installed_says_how_to_install(monkeypatch):
    """With neither libngspice nor the ngspice program, the error tells how to install ngspice."""
    monkeypatch.setattr(sim, "find_libngspice", lambda: None)
    monkeypatch.setattr(sim, "find_ngspice_binary", lambda: None)
    with pytest.raises(SimulatorUnavailableError, match="apt-get install ngspice"):
        sim.default_simulator()


@pytest.mark.ngspice
def test_backend_can_be_chosen():
    """backend='batch' and backend='shared' give those backends; an unknown name is refused."""
    assert isinstance(sim.default_simulator(backend="batch"), sim.BatchSimulator)
    shared = sim.default_simulator(backend="shared")
    try:
        assert isinstance(shared, sim.SharedLibrarySimulator)
    finally:
        shared.close()
    with pytest.raises(ValueError, match="backend must be"):
        sim.default_simulator(backend="spice3")
