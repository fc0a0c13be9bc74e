"""What measure() records beside the margins: the time its simulations took, its job checks, splits kept for the next seed."""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest

import netloop.jobs.measure as measure_module
from netloop.jobs.measure import measure
from netloop.sim import default_simulator

pytestmark = pytest.mark.ngspice

# A behavioural loop (invented): an error amplifier of gain 1000, two buffered RC poles at 1 kHz and 1 MHz back to out.
TWO_POLE = "\n".join([
    "behavioural two-pole loop (invented)", "vref ref 0 dc 0.5", "e0 n0 0 ref out 1000",
    "r1 n0 p1 1k", f"c1 p1 0 {1 / (2 * math.pi * 1e3 * 1e3):.17g}", "eb1 b1 0 p1 0 1",
    "r2 b1 out 1k", f"c2 out 0 {1 / (2 * math.pi * 1e3 * 1e6):.17g}", ".end", ""])


class _TickingSimulator:
    """ngspice, behind a clock that moves only while a job runs: by ``TICK_S`` per job."""

    TICK_S = 0.25  # exact in binary: sums of it are exact

    def __init__(self, simulator, clock: SimpleNamespace):
        self.simulator, self.clock, self.jobs = simulator, clock, 0
        self.ngspice_seconds: list[float] = []  # ngspice's own time in each job, as its result says

    def run(self, job):
        result = self.simulator.run(job)
        self.jobs += 1
        self.clock.now += self.TICK_S
        self.ngspice_seconds.append(result.ngspice_seconds)
        return result

    def __getattr__(self, name: str):
        return getattr(self.simulator, name)


def _measured_with_clock(monkeypatch, netlist: str, at: str):
    """measure() through _TickingSimulator, with measure's clock (time.perf_counter) replaced by the ticking one."""
    clock = SimpleNamespace(now=100.0)
    monkeypatch.setattr(measure_module, "time", SimpleNamespace(perf_counter=lambda: clock.now))
    simulator = default_simulator()
    try:
        ticking = _TickingSimulator(simulator, clock)
        result = measure(netlist, at, simulator=ticking)
    finally:
        simulator.close()
    return result, ticking


def test_a_plain_loop_reports_its_simulation_time_and_runs_no_job_check(monkeypatch):
    """A plain loop (no bridge at the node, P = 0) records as its simulation time exactly the time its jobs took, and
    carries no job check: no split tried, no second break, no pole analysis of the closed circuit."""
    # Reference: SimInfo.seconds is the time spent in the simulator's runs (netloop.jobs.loop_result), here a clock that
    # moves 0.25 s per job and never outside one; docs/splitting.md section 5 and netloop.jobs.measure_checks: "Plain loops
    # (no bridge at the node, every check passed, P = 0) run none of this" (closed-loop-pz only when P > 0).
    result, ticking = _measured_with_clock(monkeypatch, TWO_POLE, "out")
    assert result.analysis.nyquist.open_loop_rhp_poles == 0 and result.analysis.nyquist.open_loop_rhp_from == "fit"
    assert ticking.jobs >= 2  # the first sweep and at least one refinement round
    assert result.sim.seconds == ticking.jobs * _TickingSimulator.TICK_S
    assert result.checks == ()
    # SimInfo.backend names the ngspice interface that ran the jobs (netloop.sim: ngspice-shared or ngspice-batch)
    assert result.sim.backend in ("ngspice-shared", "ngspice-batch") and result.sim.backend == ticking.simulator.backend


# One Miller stage (invented) whose loop back to its input is a 1 GOhm resistor: broken at x, the rules keep cc with the
# load side, which leaves the -80 dB path alone; netloop measures again with cc moved (tests/jobs/test_measure_pair.py).
MILLER_STAGE = "\n".join([
    "Miller stage with a weak path back (invented)", "g1 0 x a 0 1m", "r1 x 0 10k", "c1 x 0 1p", "g2 y 0 x 0 1m",
    "r2 y 0 10k", "c2 y 0 5p", "cc x y 1p", "rw y a 1g", "ra a 0 1k", ".end", ""])


def test_the_jobs_of_a_moved_split_count_in_the_simulation_time(monkeypatch):
    """A break whose rules' split is measured again with its bridge moved records as its simulation time every job it
    ran, the retries' with the first split's, and as ngspice's own time the sum of what each job's result says."""
    # Reference: SimInfo.seconds and ngspice_seconds cover every simulation of the measurement (netloop.jobs.loop_result);
    # here the jobs are counted and timed by the ticking clock and by their own results.
    result, ticking = _measured_with_clock(monkeypatch, MILLER_STAGE, "x")
    assert [c.name for c in result.checks][:1] == ["split"] and result.checks[0].detail.startswith("cc to the driver side: ")
    assert ticking.jobs >= 3  # the rules' split (its first sweep: nothing there crosses 0 dB), then the moved one, refined
    assert result.sim.seconds == ticking.jobs * _TickingSimulator.TICK_S
    assert result.sim.ngspice_seconds == pytest.approx(sum(ticking.ngspice_seconds), rel=1e-12)
    assert 0 < result.sim.ngspice_seconds
    # the sentence of the split measured says how it was decided: the rules' words, then netloop's move and why (netloop,
    # not the user, placed cc: before, "with cc (placed there on request)" and "; netloop cc to the driver side: ...")
    assert result.breaks.decided_by.startswith("driver side: g1.n (outputs: drain, collector, controlled-source or instance output); "
                                               "with cc (moved there by netloop: below); load side: g2.cp; ")
    assert result.breaks.decided_by.endswith(f"(either side gives the same T); netloop moved {result.checks[0].detail}.")


def test_a_placement_given_is_the_split_measured():
    """placement= puts the bridge where the caller says and measures that split as given: cc with the driver at x of
    MILLER_STAGE, no split check (netloop tries no other placement of a split the caller chose)."""
    result = measure(MILLER_STAGE, "x", placement={"cc": "driver"})
    assert (result.breaks.driver_terminals, result.breaks.load_terminals) == (("g1.n", "cc.p"), ("g2.cp",))
    assert "with cc (placed there on request)" in result.breaks.decided_by and "netloop" not in result.breaks.decided_by
    assert [c.name for c in result.checks] == []


# The same loop with a negative resistor at p1 (invented): 1/1k - 1/500 makes the first stage 1/(s tau1 - 1), a pole of the
# opened loop in the right half-plane; e0 is turned round so that T = A0 / ((1 - s tau1)(1 + s tau2)).
RHP_POLE = "\n".join([
    "opened loop with a right-half-plane pole (invented)", "vref ref 0 dc 0", "e0 n0 0 out ref 1000",
    "r1 n0 p1 1k", "c1 p1 0 1n", "rneg p1 0 -500", "eb1 b1 0 p1 0 1", "r2 b1 out 1k", "c2 out 0 1p", ".end", ""])


def test_a_loop_with_a_pole_of_its_own_is_checked_by_ngspices_pole_analysis():
    """When T has a right-half-plane pole of its own (P = 1 read from the data) on a small circuit, the result carries the
    passed check closed-loop-pz, whose count of closed-loop right-half-plane poles is the closed form's."""
    # Reference: circuit theory, T = A0 / ((1 - s tau1)(1 + s tau2)) with tau1 = 1k * 1n, tau2 = 1k * 1p: P = 1, and the
    # closed loop's characteristic (1 - s tau1)(1 + s tau2) + A0 has one root in the RHP (numpy.roots); docs/splitting.md
    # section 5 (closed-loop-pz: ngspice's own pz of the closed circuit must find Z = N + P).
    tau1, tau2, a0 = 1e-6, 1e-9, 1000.0
    z = int(np.sum(np.roots(np.polyadd(np.polymul([-tau1, 1.0], [tau2, 1.0]), [a0])).real > 0))
    result = measure(RHP_POLE, "out")
    assert result.analysis.nyquist.open_loop_rhp_poles == 1
    assert [(c.name, c.passed) for c in result.checks] == [("closed-loop-pz", True)]
    assert result.checks[0].detail == (f"ngspice's pole analysis of the closed circuit finds {z} right-half-plane pole(s); "
                                       f"Z = N + P = {z}")
    assert not result.stable and not result.passed


def test_the_split_kept_for_the_next_seed_measures_as_a_fresh_split_does():
    """Two samples of one corner (netlists differing in .option seed only) measured with one decisions dict: the second,
    measured on the kept split rewritten for its seed, gives the result a fresh measurement of it gives."""
    # Reference: netloop.jobs.kept_probes (the probe never reads .option lines, so the rewritten split is the one break_loop
    # builds afresh; tests/jobs/test_kept_probes.py); ngspice is deterministic for one netlist, so the margins agree exactly.
    first, second = (TWO_POLE.replace("\n", f"\n.option seed={n}\n", 1) for n in (1, 2))
    decisions: dict = {}
    measure(first, "out", decisions=decisions)
    assert any(key[0] == "probes" for key in decisions)
    kept = measure(second, "out", decisions=decisions)
    fresh = measure(second, "out")
    assert kept.breaks == fresh.breaks and kept.checks == fresh.checks
    assert kept.analysis.margins == fresh.analysis.margins


def test_a_loop_search_that_fails_leaves_the_measurement_standing_and_says_why(monkeypatch, caplog):
    """When the search for the loops through the net fails, the measurement stands without the check that needs it
    ("opens-loop"), and the status log (logger "netloop", level INFO) says why."""
    import logging  # noqa: PLC0415

    from netloop.errors import NetloopError  # noqa: PLC0415

    def fails(parsed, at):
        raise NetloopError("the graph could not be built")

    monkeypatch.setattr(measure_module, "LoopStructure", fails)
    with caplog.at_level(logging.INFO, logger="netloop"):
        result = measure(MILLER_STAGE, "x")
    assert "the loops through x could not be stated: the graph could not be built" in caplog.messages
    assert "opens-loop" not in [c.name for c in result.checks] and result.analysis.regulates
