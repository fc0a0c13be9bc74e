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
    with pytest.raises(SimulatorUnavailableError, match="apt-get install ngspice") as caught:
        sim.default_simulator()
    assert str(caught.value).startswith("libngspice not found; no ngspice binary on PATH; ")  # what was looked for, both


def test_a_library_that_cannot_load_is_named_when_nothing_else_is_there(monkeypatch, tmp_path):
    """A libngspice that is found but cannot be loaded, and no ngspice program: the error says which library failed
    and why (the loader's error), then that no program was found."""
    bogus = tmp_path / "libngspice.so"
    bogus.write_bytes(b"\x7fELF but not really")
    monkeypatch.setattr(sim, "find_libngspice", lambda: str(bogus))
    monkeypatch.setattr("netloop.sim.shared.find_libngspice", lambda: str(bogus))
    monkeypatch.setattr(sim, "find_ngspice_binary", lambda: None)
    with pytest.raises(SimulatorUnavailableError) as caught:
        sim.default_simulator()
    message = str(caught.value)
    assert message.startswith(f"libngspice at {bogus} cannot be loaded: OSError: ")
    assert "; no ngspice binary on PATH; " in message
    assert message.count("apt-get install") == 1  # the hint once, after every failure


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


@pytest.mark.ngspice
def test_several_processes_keep_the_whole_deck_where_asked(tmp_path):
    """default_simulator(processes=2, keep_dir=...) shares each job's runs out to two ngspice processes and keeps the
    job's whole deck there (both runs in it), as one process would (`netloop check --keep-decks` on a large circuit)."""
    job = sim.SimJob("rc\nv1 in 0 dc 0 ac 1\nr1 in out 1k\nc1 out 0 1n\n",
                     runs=(sim.AcRun("a", {"v1": 1.0}, (sim.AcSweep("dec", 3, 1e3, 1e6),)),
                           sim.AcRun("b", {"v1": 2.0}, (sim.AcSweep("dec", 3, 1e3, 1e6),))),
                     save=("v(out)",), excitable=("v1",), label="kept")
    with sim.default_simulator(keep_dir=str(tmp_path), processes=2) as simulator:
        assert len(simulator.simulators) == 2
        result = simulator.run(job)
    (deck,) = tmp_path.glob("*.cir")
    assert result.deck_path == str(deck)
    assert deck.read_text().lower().count("\nac ") == 2  # both runs, one ac each
