"""Jobs on the same circuit reuse the loaded circuit (no second load, no separate op) and stay exact."""

from __future__ import annotations

import numpy as np
import pytest
from sim_decks import NO_SOLUTION

from netloop.sim import AcRun, AcSweep, SimJob, find_libngspice
from netloop.sim.session_job import JobFailure, JobRunner

RC = "rc\nv1 in 0 dc 1 ac 0\nr1 in out 1k\nc1 out 0 1n\n"
RC2 = "rc2\nv1 in 0 dc 1 ac 0\nr1 in out 2k\nc1 out 0 1n\n"


def _job(netlist: str, sweeps: tuple[AcSweep, ...], op_voltages: bool = True, circuit_id: str = "m1") -> SimJob:
    return SimJob(netlist, runs=(AcRun("a", {"v1": 1.0}, sweeps),), save=("v(out)",), excitable=("v1",), op_voltages=op_voltages,
                  circuit_id=circuit_id)


def _expected(freq_hz: np.ndarray, r_ohm: float) -> np.ndarray:
    return 1 / (1 + 2j * np.pi * freq_hz * r_ohm * 1e-9)  # circuit theory: RC low-pass, closed form


_SESSIONS: list = []  # libngspice once per process: PySpice declares its C interface again for a second session, which cffi
# refuses, and mutmut runs these tests twice in one process (tools/mutate.py's sim package)


@pytest.fixture(scope="module")
def recording():
    from netloop.sim.session import NgspiceSession  # noqa: PLC0415 - loads libngspice in this process

    class Recording(NgspiceSession):
        def __init__(self, path: str):
            super().__init__(path)
            self.calls: list[str] = []

        def load(self, deck_text: str) -> list[str]:
            self.calls.append("load")
            return super().load(deck_text)

        def command(self, command: str) -> list[str]:
            self.calls.append(command.split()[0])
            return super().command(command)

    if not _SESSIONS:
        _SESSIONS.append(Recording(find_libngspice()))
    session = _SESSIONS[0]
    JobRunner(session).forget()  # no circuit left from an earlier run of these tests
    return session


@pytest.mark.ngspice
def test_second_round_skips_load_and_op_and_is_exact(recording):
    """A second job of one measurement on the same circuit (other sweeps) loads nothing and runs no op, yet matches
    the closed form; another circuit, another circuit_id or none loads afresh."""
    runner = JobRunner(recording)
    recording.calls.clear()
    first = runner.run(_job(RC, (AcSweep("dec", 5, 1e3, 1e6),)))
    assert recording.calls.count("load") == 1 and recording.calls.count("op") == 1 and "save" in recording.calls
    assert first.operating_point["out"] == pytest.approx(1.0, rel=1e-9)  # no DC current through c1: v(out) = v(in)
    recording.calls.clear()
    second = runner.run(_job(RC, (AcSweep("lin", 7, 1e5, 2e5),)))
    assert "load" not in recording.calls and "op" not in recording.calls
    assert "save" not in recording.calls  # the first job's saves stay set on the circuit
    assert second.operating_point == first.operating_point
    name, freq, (v_out,) = second.runs[0]  # the job's saves, one row each
    np.testing.assert_allclose(freq, np.linspace(1e5, 2e5, 7), rtol=1e-12)  # ngspice's lin sweep: 7 evenly spaced points
    np.testing.assert_allclose(v_out, _expected(freq, 1e3), rtol=1e-9)
    recording.calls.clear()
    other = runner.run(_job(RC2, (AcSweep("lin", 3, 1e5, 2e5),)))
    assert recording.calls.count("load") == 1
    recording.calls.clear()
    runner.run(_job(RC2, (AcSweep("lin", 3, 1e5, 2e5),), circuit_id="m2"))  # another measurement: loaded afresh
    runner.run(_job(RC2, (AcSweep("lin", 3, 1e5, 2e5),), circuit_id=""))  # no id: always loaded afresh
    assert recording.calls.count("load") == 2
    np.testing.assert_allclose(other.runs[0][2][0], _expected(other.runs[0][1], 2e3), rtol=1e-9)
    runner.forget()


@pytest.mark.ngspice
def test_without_op_voltages_the_first_ac_is_the_only_operating_point(recording):
    """op_voltages=False runs no separate op (ngspice's 'Doing analysis' appears once per ac only) and gives the same vectors."""
    runner = JobRunner(recording)
    recording.calls.clear()
    sweeps = (AcSweep("dec", 5, 1e3, 1e6), AcSweep("lin", 3, 2e6, 3e6))
    payload = runner.run(_job(RC, sweeps, op_voltages=False))
    assert "op" not in recording.calls and recording.calls.count("ac") == 2
    assert payload.log.count("Doing analysis") == 2  # ngspice prints this once per analysis it starts
    assert payload.operating_point == {}
    name, freq, (v_out,) = payload.runs[0]
    np.testing.assert_allclose(v_out, _expected(freq, 1e3), rtol=1e-9)
    runner.forget()


@pytest.mark.ngspice
def test_without_op_voltages_a_failed_operating_point_tries_every_aid(recording):
    """When the first ac's own operating point fails, every convergence aid is tried and the failure says 'op'."""
    job = SimJob(NO_SOLUTION, runs=(AcRun("a", {"v1": 1.0}, (AcSweep("dec", 1, 1, 10),)),), save=("v(n)",),
                 excitable=("v1",), op_aids=("itl1=500",), op_voltages=False)
    runner = JobRunner(recording)
    with pytest.raises(JobFailure) as caught:
        runner.run(job)
    assert caught.value.kind == "op" and caught.value.tried == (None, "itl1=500")
    assert "AC operating point failed" in caught.value.output  # ngspice 39's own words


@pytest.mark.ngspice
def test_each_saved_vector_comes_back_as_its_own(recording):
    """Several saves come back each with its own values, in the job's order (ngspice describes one vector at a time in
    one record of its own, which the next look-up overwrites): v(in) is the source's 1 V, v(out) the closed form."""
    runner = JobRunner(recording)
    job = SimJob(RC, runs=(AcRun("a", {"v1": 1.0}, (AcSweep("dec", 5, 1e3, 1e6),)),), save=("v(out)", "V(in)", "i(v1)"), excitable=("v1",))
    name, freq, (v_out, v_in, i_v1) = runner.run(job).runs[0]
    np.testing.assert_allclose(v_out, _expected(freq, 1e3), rtol=1e-9)
    np.testing.assert_array_equal(v_in, np.ones(freq.size))
    np.testing.assert_allclose(i_v1, -(1 - _expected(freq, 1e3)) / 1e3, rtol=1e-9)  # into v1's + terminal: -(v(in)-v(out))/r1
    runner.forget()


@pytest.mark.ngspice
def test_another_save_on_the_same_circuit_comes_back(recording):
    """A job of the same measurement on the same circuit that saves another vector gets that vector (ngspice keeps only
    what it was told to save, so the circuit kept for the first job's saves cannot serve it as it is)."""
    runner = JobRunner(recording)
    sweep = (AcSweep("dec", 5, 1e3, 1e6),)
    first = runner.run(_job(RC, sweep))
    second = runner.run(SimJob(RC, runs=(AcRun("a", {"v1": 1.0}, sweep),), save=("v(in)",), excitable=("v1",), op_voltages=True,
                               circuit_id="m1"))
    name, freq, (v_in,) = second.runs[0]
    np.testing.assert_array_equal(v_in, np.ones(freq.size))  # the source node: the 1 V excitation itself
    np.testing.assert_allclose(first.runs[0][2][0], _expected(freq, 1e3), rtol=1e-9)
    runner.forget()


@pytest.mark.ngspice
def test_ngspice_holds_at_most_two_circuits(recording):
    """However many circuits are loaded one after the other, ngspice holds the current one and at most one before it
    (JobRunner): memory stays bounded over a run of thousands of samples."""
    runner = JobRunner(recording)
    sweep = (AcSweep("dec", 5, 1e3, 1e6),)
    for i, r_ohm in enumerate((1e3, 2e3, 3e3, 4e3, 5e3)):
        netlist = f"rc{i}\nv1 in 0 dc 1 ac 0\nr1 in out {r_ohm:g}\nc1 out 0 1n\n"
        name, freq, (v_out,) = runner.run(_job(netlist, sweep, circuit_id=f"m{i}")).runs[0]
        np.testing.assert_allclose(v_out, _expected(freq, r_ohm), rtol=1e-9)
        assert runner._count() <= 2  # noqa: SLF001 - ngspice's own list of the circuits it holds (setcirc)
    runner.forget()
    assert runner._count() == 0  # noqa: SLF001


@pytest.mark.ngspice
@pytest.mark.parametrize("extra", [0, 1])
def test_a_circuit_is_kept_beside_the_next_up_to_its_size_limit(recording, extra):
    """A circuit whose netlist has KEEP_MAX_CHARS characters stays loaded beside the next one; one character more and it
    is taken out (ngspice's memory for a large circuit is not spent on keeping it)."""
    from netloop.sim.session_job import KEEP_MAX_CHARS  # noqa: PLC0415

    runner = JobRunner(recording)
    sweep = (AcSweep("dec", 5, 1e3, 1e6),)
    padding = "* " + "p" * (KEEP_MAX_CHARS + extra - len(RC) - 3) + "\n"  # a comment line: the circuit is the RC's
    large = RC + padding
    assert len(large) == KEEP_MAX_CHARS + extra
    runner.run(_job(large, sweep, circuit_id="large"))
    name, freq, (v_out,) = runner.run(_job(RC2, sweep, circuit_id="small")).runs[0]
    np.testing.assert_allclose(v_out, _expected(freq, 2e3), rtol=1e-9)
    assert runner._count() == (2 if extra == 0 else 1)  # noqa: SLF001 - ngspice's own list of the circuits it holds
    runner.forget()


# an RC low-pass whose resistor is {p}k, beside a source vb whose DC value is read at node b
TUNED = "tuned rc\n.param p={p}\nv1 in 0 dc 0 ac 0\nvb b 0 dc {vb}\nrb b 0 1k\nr1 in out {{p*1k}}\nc1 out 0 1n\n"


@pytest.mark.ngspice
def test_a_job_the_current_circuit_can_take_in_place_stays_on_it(recording):
    """With two circuits held that could both be changed into the next job, the job runs on the one ngspice works on
    (JobRunner: the current circuit is tried first): switched back to the p = 1 circuit, a job that changes only vb
    there sets vb (alter), and neither switches to the p = 2 circuit nor sets p again (no alterparam, no reset, one setcirc:
    the count of circuits); its vectors are the closed form."""
    from netloop.sim import Change  # noqa: PLC0415

    runner = JobRunner(recording)
    sweep = (AcSweep("dec", 5, 1e3, 1e6),)

    def tuned(p: str, vb: str, circuit_id: str, changing: bool = True) -> SimJob:
        changes = (Change("param", "p", p), Change("source", "vb", vb)) if changing else ()
        return SimJob(TUNED.format(p=p, vb=vb), runs=(AcRun("a", {"v1": 1.0}, sweep),), save=("v(out)",), excitable=("v1",),
                      circuit_id=circuit_id, label="c1", changes=changes)

    runner.run(tuned("1", "0", "a"))
    runner.run(SimJob(RC2, runs=(AcRun("a", {"v1": 1.0}, sweep),), save=("v(out)",), excitable=("v1",), circuit_id="x", label="c2"))
    runner.run(tuned("2", "0", "b"))  # p changes: not on the older p = 1 circuit (only the newest takes a reset), loaded
    runner.run(tuned("1", "0", "a", changing=False))  # the first job again: ngspice switches back to its circuit
    recording.calls.clear()
    payload = runner.run(tuned("1", "0.5", "d"))
    assert "load" not in recording.calls and "alterparam" not in recording.calls and "reset" not in recording.calls
    assert recording.calls.count("setcirc") == 1
    assert payload.operating_point["b"] == pytest.approx(0.5, rel=1e-12)  # vb's DC value
    name, freq, (v_out,) = payload.runs[0]
    np.testing.assert_allclose(v_out, _expected(freq, 1e3), rtol=1e-9)
    runner.forget()


# a relay whose drive vb scales: at vb = 0 it passes no current (v(n) = 0), at vb = 1 it has no operating point at all
# (KCL at n as in sim_decks.NO_SOLUTION: v > 0.5 needs v = -2 V, v <= 0.5 needs v = +2 V)
RELAY = "scaled relay\nvb b 0 dc {vb}\nb1 n 0 i = (v(n) > 0.5 ? 2m : -2m) * v(b)\nr1 n 0 1k\nv1 in 0 dc 0 ac 1\nr2 in n 1k\n"


@pytest.mark.ngspice
def test_a_change_in_place_that_loses_the_operating_point_is_tried_as_a_fresh_load(recording):
    """A job that differs from the loaded circuit only in a source's DC value is run on it in place; when the first ac
    then finds no operating point, the job goes as a fresh load would: loaded again, every convergence aid tried, and
    ngspice's failure of the operating point raised, naming what was tried."""
    from netloop.sim import Change  # noqa: PLC0415

    runner = JobRunner(recording)
    sweep = (AcSweep("dec", 1, 1, 10),)

    def job(vb: str) -> SimJob:
        return SimJob(RELAY.format(vb=vb), runs=(AcRun("a", {"v1": 1.0}, sweep),), save=("v(n)",), excitable=("v1",),
                      op_voltages=False, op_aids=("itl1=500",), circuit_id=f"relay-{vb}", changes=(Change("source", "vb", vb),))

    first = runner.run(job("0"))
    np.testing.assert_allclose(first.runs[0][2][0], 0.5, rtol=1e-9)  # v(n) = v1 through the 1k divider: 1/2
    recording.calls.clear()
    with pytest.raises(JobFailure) as caught:
        runner.run(job("1"))
    assert caught.value.kind == "op" and caught.value.tried == (None, "itl1=500")
    assert recording.calls.count("load") == 2  # in place first (no load), then fresh: one load for each aid
    runner.forget()
