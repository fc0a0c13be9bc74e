"""Operating points that need ngspice's recovery, and one that has no solution at all."""

from __future__ import annotations

import subprocess
from pathlib import Path

import pytest

from sim_decks import NO_SOLUTION

from netloop.errors import SimulationError
from netloop.sim import DEFAULT_OP_AIDS, AcRun, AcSweep, SimJob

# KCL at n: the behavioural current v(n)^3 - 1 mA must be zero, so v(n) = 0.1 V; the zero slope at
# the 0 V starting point gives a singular matrix and ngspice starts dynamic gmin stepping.
CUBIC = """cubic
b1 n 0 i = v(n)*v(n)*v(n) - 1m
"""


@pytest.mark.ngspice
def test_gmin_stepping_note_is_not_an_error(simulator):
    """ngspice's 'Note: Starting dynamic gmin stepping' appears in the log and the job still succeeds,
    with v(n) = 0.1 V, the real root of v^3 = 1e-3 (closed form), and says gmin stepping found it."""
    result = simulator.run(SimJob(netlist=CUBIC, runs=(), save=()))
    assert "Starting dynamic gmin stepping" in result.log  # ngspice 39's own note for this circuit
    assert result.operating_point == {"n": pytest.approx(0.1, rel=1e-9)}
    assert result.convergence_aid == "ngspice: dynamic gmin stepping"  # its 'Dynamic gmin stepping completed'


# A current source into a node that only a capacitor touches has no DC solution; ngspice 39 then
# runs its transient operating point, which integrates the current for its default 10 us.
NO_DC_PATH = """no dc path
i1 0 n 1m
c1 n 0 1n
"""


@pytest.mark.ngspice
def test_transient_operating_point_is_reported(simulator):
    """When only ngspice's own transient operating point 'finds' a point, convergence_aid says so, and
    the value is what that transient gives: I*T/C = 1 mA * 10 us / 1 nF = 10 V (T from ngspice's
    README.optran, default optran time 10u)."""
    result = simulator.run(SimJob(netlist=NO_DC_PATH, runs=(), save=()))
    assert result.convergence_aid == "ngspice: transient operating point"
    assert result.operating_point["n"] == pytest.approx(10.0, rel=1e-6)


@pytest.mark.ngspice
def test_no_solution_reports_non_convergence(simulator, tmp_path):
    """An operating point with no solution raises SimulationError that says so, names the ngspice
    options that usually help, carries ngspice's own message and the corner, and keeps the deck."""
    job = SimJob(
        netlist=NO_SOLUTION,
        runs=(AcRun("r", {"v1": 1.0}, (AcSweep("dec", 2, 1.0, 10.0),)),),
        save=("v(n)",),
        excitable=("v1",),
        label="slow-cold",
        op_aids=("gminsteps=100", "srcsteps=100"),
    )
    simulator.keep_dir, saved = tmp_path, simulator.keep_dir
    try:
        with pytest.raises(SimulationError) as caught:
            simulator.run(job)
    finally:
        simulator.keep_dir = saved
    error = caught.value
    text = str(error)
    assert "operating point did not converge" in text
    assert "gminsteps" in text and "srcsteps" in text and "itl1" in text and ".nodeset" in text
    assert "'.option gminsteps=100'" in text and "'.option srcsteps=100'" in text  # the aids tried
    assert "op simulation(s) aborted" in text  # ngspice 39's own words for a failed op
    assert error.corner == "slow-cold" and text.startswith("[slow-cold]")
    deck = Path(error.deck_path)
    assert deck.parent == tmp_path and deck.is_file()
    kept = deck.read_text()
    assert NO_SOLUTION.strip() in kept and ".option srcsteps=100" in kept and "\nop\n" in kept
    # ngspice's last 60 lines, whole (the corner record, the JUnit system-out and the HTML page show them): those of the
    # whole output kept beside the deck
    written = [line.rstrip() for line in Path(error.log_path).read_text().splitlines() if line.strip()]
    assert error.simulator_output.splitlines() == written[-60:] and len(written) > 60


def test_default_aids_are_ngspice_options():
    """Each default aid is a list of option=value words whose names ngspice 39 knows (from the ngspice
    manual, chapter on .options: ITL1, GMINSTEPS, SRCSTEPS)."""
    known = {"itl1", "gminsteps", "srcsteps"}
    for aid in DEFAULT_OP_AIDS:
        for word in aid.split():
            name, _, value = word.partition("=")
            assert name in known and int(value) > 1


@pytest.mark.ngspice
def test_hard_operating_point_reports_the_aid(simulator, circuits):
    """circuits/testbench/hard_op.cir, whose operating point plain Newton cannot find, converges by
    ngspice's gmin stepping, and the result says so; vout is the design value vref*(1+R1/R2) = 2.4 V."""
    path = circuits / "testbench" / "hard_op.cir"
    result = simulator.run(SimJob(path.read_text(), runs=(), save=(), workdir=str(path.parent)))
    assert "Starting dynamic gmin stepping" in result.log  # ngspice's note that plain Newton failed
    assert result.convergence_aid == "ngspice: dynamic gmin stepping"
    assert result.operating_point["vout"] == pytest.approx(2.4, abs=0.01)  # design equation in the file's header


@pytest.mark.ngspice
def test_netlist_that_needs_one_of_our_aids_reports_it(simulator):
    """CUBIC with the netlist's own '.option gminsteps=0 srcsteps=100' (gmin stepping off) fails in
    ngspice 39 as given and with 'itl1=1000'; the default aid 'gminsteps=100' (a later .option wins)
    finds v(n) = 0.1 V (closed form), and convergence_aid names that aid."""
    netlist = CUBIC + ".option gminsteps=0 srcsteps=100\n"
    result = simulator.run(SimJob(netlist=netlist, runs=(), save=()))
    assert DEFAULT_OP_AIDS[:2] == ("itl1=1000", "gminsteps=100")
    assert result.convergence_aid == "gminsteps=100"
    assert result.operating_point == {"n": pytest.approx(0.1, rel=1e-9)}
    assert "spice3 gmin stepping completed" in result.log  # ngspice's own note for the ladder the aid selects


@pytest.mark.ngspice
def test_a_circuit_kept_loaded_keeps_the_aid_it_needed(shared_sim, tmp_path):
    """A second job of one measurement on the circuit loaded with an aid (CUBIC needing gminsteps=100, above) runs on it
    without a load, reports the same aid, and keeps a deck that holds the aid: run by hand, that deck converges too."""
    netlist = CUBIC + ".option gminsteps=0 srcsteps=100\niin 0 n dc 0 ac 1\n"  # an AC current in: no DC path added
    sweep = (AcSweep("dec", 2, 1.0, 10.0),)
    job = SimJob(netlist=netlist, runs=(AcRun("r", {"iin": 1.0}, sweep),), save=("v(n)",), excitable=("iin",),
                 circuit_id="cubic-kept", op_voltages=True)
    shared_sim.keep_dir, saved = tmp_path, shared_sim.keep_dir
    try:
        first = shared_sim.run(job)
        second = shared_sim.run(SimJob(netlist=netlist, runs=(AcRun("r", {"iin": 1.0}, (AcSweep("lin", 3, 2.0, 4.0),)),),
                                       save=("v(n)",), excitable=("iin",), circuit_id="cubic-kept", op_voltages=True))
    finally:
        shared_sim.keep_dir = saved
    assert first.convergence_aid == second.convergence_aid == "gminsteps=100" and not second.loaded
    kept = Path(second.deck_path)
    assert ".option gminsteps=100" in kept.read_text()
    by_hand = subprocess.run(["ngspice", "-b", str(kept)], capture_output=True, text=True, timeout=60, check=False)
    assert "simulation(s) aborted" not in by_hand.stdout + by_hand.stderr
