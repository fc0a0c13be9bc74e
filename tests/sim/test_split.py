"""Runs shared out to several simulators give what one simulator running every run gives."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from sim_decks import NO_SOLUTION, RECOVERS

from netloop.errors import SimulationError
from netloop.sim import AcRun, AcSweep, AnalyticSimulator, SharedLibrarySimulator, SimJob, SplitRunsSimulator, processes_for
from netloop.sim import split as split_module
from netloop.sim.split import MAX_AUTO_PROCESSES, SPLIT_MIN_ELEMENTS, split_runs

SWEEPS = (AcSweep("dec", 5, 1e3, 1e6), AcSweep("lin", 4, 2e6, 3e6))


def _response(freq_hz, ac):
    """A vector that tells the runs apart: each source's AC magnitude weights a different power of f."""
    return ac["va"] * (1 + 1j * freq_hz / 1e4) + ac["vb"] * 3 * (1 + 1j * freq_hz / 1e5) ** 2 + ac["vc"] * 7


def _job(runs: int, op_voltages: bool = True) -> SimJob:
    names = ("va", "vb", "vc")
    acs = ({"va": 1.0}, {"vb": 1.0}, {"vc": 1.0}, {"va": 1.0, "vb": -1.0}, {"vb": 2.0, "vc": 1.0})
    return SimJob("t\n", runs=tuple(AcRun(f"r{i}", acs[i], SWEEPS) for i in range(runs)), save=("v(x)",), excitable=names,
                  op_voltages=op_voltages)


@pytest.mark.parametrize(("runs", "groups"), [(2, 2), (4, 2), (5, 3), (3, 4), (1, 2)])
def test_split_results_equal_one_simulator_in_run_order(runs, groups):
    """Whatever the number of runs and simulators, the merged result has every run, in the job's order, equal to one
    simulator's (the analytic fake's closed form is the reference)."""
    job = _job(runs)
    alone = AnalyticSimulator({"v(x)": _response}, {"x": 0.5}).run(job)
    sims = [AnalyticSimulator({"v(x)": _response}, {"x": 0.5}) for _ in range(groups)]
    merged = SplitRunsSimulator(sims).run(job)
    assert [r.name for r in merged.runs] == [r.name for r in alone.runs]
    for got, want in zip(merged.runs, alone.runs, strict=True):
        np.testing.assert_array_equal(got.freq_hz, want.freq_hz)
        np.testing.assert_array_equal(got.vectors["v(x)"], want.vectors["v(x)"])
    assert merged.operating_point == {"x": 0.5}
    used = [len(s.jobs) for s in sims]
    assert sum(used) == min(groups, runs)  # one share per simulator that has runs, never an empty job
    assert all(len(j.runs) >= 1 for s in sims for j in s.jobs)


def test_no_simulator_to_share_out_to_is_refused():
    """SplitRunsSimulator needs a simulator: none is a ValueError that says so."""
    with pytest.raises(ValueError, match="^SplitRunsSimulator needs at least one simulator$"):
        SplitRunsSimulator([])


def test_only_the_first_share_asks_for_the_operating_point():
    """The operating point is the same in every share, so the others are spared the separate op run."""
    shares = split_runs(_job(4), 2)
    assert [s.op_voltages for s in shares] == [True, False]
    assert [s.op_voltages for s in split_runs(_job(4, op_voltages=False), 2)] == [False, False]
    assert [[r.name for r in s.runs] for s in shares] == [["r0", "r2"], ["r1", "r3"]]


def test_policy_splits_only_large_circuits_up_to_the_cpus(monkeypatch):
    """Below the measured size one process; above it one a run, never more than the usable CPUs or MAX_AUTO_PROCESSES."""
    monkeypatch.setattr(split_module, "usable_cpus", lambda: 2)
    assert processes_for(SPLIT_MIN_ELEMENTS - 1, 2) == 1
    assert processes_for(SPLIT_MIN_ELEMENTS, 2) == 2
    assert processes_for(SPLIT_MIN_ELEMENTS, 4) == 2
    monkeypatch.setattr(split_module, "usable_cpus", lambda: 1)
    assert processes_for(10 * SPLIT_MIN_ELEMENTS, 2) == 1
    monkeypatch.setattr(split_module, "usable_cpus", lambda: 8)
    assert processes_for(SPLIT_MIN_ELEMENTS, 4) == 4
    assert processes_for(SPLIT_MIN_ELEMENTS, 16) == MAX_AUTO_PROCESSES  # one circuit a process: memory bounds it


LOOP = """two-run rc loop
vs in 0 dc 1 ac 0
e1 a 0 in fb 100
r1 a b 1k
c1 b 0 1n
vprobe b out dc 0 ac 0
iprobe 0 out dc 0 ac 0
r2 out fb 1k
c2 fb 0 10p
"""


def _probe_job() -> SimJob:
    runs = (AcRun("series", {"vprobe": 1.0}, SWEEPS), AcRun("shunt", {"iprobe": 1.0}, SWEEPS))
    return SimJob(LOOP, runs=runs, save=("v(b)", "v(out)", "i(vprobe)"), excitable=("vprobe", "iprobe"), circuit_id="split-test")


@pytest.mark.ngspice
def test_two_ngspice_processes_give_one_processs_vectors_exactly(shared_sim, tmp_path):
    """Each excitation in its own ngspice gives bit for bit the vectors and operating point of one ngspice doing both,
    over two rounds on the kept circuit; the kept deck is the whole job's, one per job."""
    job = _probe_job()
    alone = shared_sim.run(job)
    keep = tmp_path / "decks"
    with SplitRunsSimulator([SharedLibrarySimulator(), SharedLibrarySimulator()], keep_dir=str(keep)) as split:
        both = split.run(job)
        again = split.run(job)
    for result in (both, again):
        assert [r.name for r in result.runs] == ["series", "shunt"]
        for got, want in zip(result.runs, alone.runs, strict=True):
            np.testing.assert_array_equal(got.freq_hz, want.freq_hz)
            for key in want.vectors:
                np.testing.assert_array_equal(got.vectors[key], want.vectors[key])
    assert both.operating_point == alone.operating_point and both.operating_point["out"] == pytest.approx(100 / 101, rel=1e-9)  # follower of DC gain 100: A/(1+A)
    decks = sorted(keep.glob("*.cir"))
    assert len(decks) == 2 and all(d == Path(both.deck_path) or d == Path(again.deck_path) for d in decks)
    text = decks[0].read_text()
    assert "alter vprobe" in text.lower() and "alter iprobe" in text.lower()  # both runs in the kept deck


@pytest.mark.ngspice
def test_a_failing_share_raises_ngspice_s_error_and_keeps_the_whole_deck(tmp_path):
    """An operating point that fails in every share raises SimulationError with the whole job's deck kept in keep_dir,
    ngspice's whole output beside it and the corner named, as one ngspice's failure of the same job is (job_error)."""
    runs = (AcRun("a", {"v1": 1.0}, SWEEPS), AcRun("b", {"v1": 2.0}, SWEEPS))
    job = SimJob(NO_SOLUTION, runs=runs, save=("v(n)",), excitable=("v1",), op_aids=("itl1=200",), timeout_s=60, label="ss_hot")
    with SplitRunsSimulator([SharedLibrarySimulator(), SharedLibrarySimulator()], keep_dir=str(tmp_path)) as split:
        with pytest.raises(SimulationError, match="operating point did not converge") as caught:
            split.run(job)
    error = caught.value
    kept = Path(error.deck_path)
    assert kept.parent == tmp_path
    assert kept.read_text().lower().count("\nac ") == 2 * len(SWEEPS)  # both runs, every sweep
    assert error.corner == "ss_hot" and str(error).startswith("[ss_hot] ")
    log = Path(error.log_path).read_text()
    assert error.log_path == str(kept.with_suffix(".log")) and log.rstrip().endswith(error.simulator_output.rstrip())
    assert f"(ngspice's whole output: {error.log_path})" in str(error)



@pytest.mark.ngspice
def test_without_a_keep_folder_a_failing_share_names_its_own_deck():
    """With no keep_dir, a share's failure is raised as the share raised it: its deck (kept in a temporary folder, as every
    failed deck is) holds that share's own run, which fails alone the same way."""
    runs = (AcRun("a", {"v1": 1.0}, SWEEPS), AcRun("b", {"v1": 2.0}, SWEEPS))
    job = SimJob(NO_SOLUTION, runs=runs, save=("v(n)",), excitable=("v1",), op_aids=("itl1=200",), timeout_s=60)
    with SplitRunsSimulator([SharedLibrarySimulator(), SharedLibrarySimulator()]) as split:
        with pytest.raises(SimulationError, match="operating point did not converge") as caught:
            split.run(job)
    assert Path(caught.value.deck_path).read_text().lower().count("\nac ") == len(SWEEPS)  # one run, every sweep


@pytest.mark.ngspice
def test_batch_mode_shares_runs_the_same_way(batch_sim):
    """Two ngspice -b processes side by side give the vectors one gives (batch mode: the fallback without libngspice)."""
    from netloop.sim import BatchSimulator

    job = _probe_job()
    alone = batch_sim.run(job)
    both = SplitRunsSimulator([BatchSimulator(), BatchSimulator()]).run(job)
    for got, want in zip(both.runs, alone.runs, strict=True):
        np.testing.assert_array_equal(got.freq_hz, want.freq_hz)
        for key in want.vectors:
            np.testing.assert_array_equal(got.vectors[key], want.vectors[key])


@pytest.mark.ngspice
def test_what_ngspice_ignored_in_either_share_is_said_once_shared(batch_sim):
    """The shares' logs are one log: a model parameter ngspice ignores (each process reads the same card) is among the
    warnings of the shared result as of one process's."""
    from netloop.sim import BatchSimulator

    ignored = "unrecognized\nv1 a 0 dc 1 ac 1\nr1 a b 1k\nd1 b 0 dm\n.model dm d is=1e-14 cox=3\n"
    runs = (AcRun("a", {"v1": 1.0}, SWEEPS), AcRun("b", {"v1": 2.0}, SWEEPS))
    job = SimJob(ignored, runs=runs, save=("v(b)",), excitable=("v1",))
    alone = batch_sim.run(job)
    both = SplitRunsSimulator([BatchSimulator(), BatchSimulator()]).run(job)
    assert alone.warnings and both.warnings == alone.warnings
    assert both.log.count("cox") == 2 * alone.log.count("cox") > 0  # each process's own output, joined


def test_an_abort_reaches_every_share():
    """abort() stops the running job of every simulator that can be stopped, and passes over one that cannot."""
    stopped = []

    class Stoppable:
        def __init__(self, name):
            self.name = name

        def abort(self):
            stopped.append(self.name)

    split = SplitRunsSimulator([Stoppable("first"), object(), Stoppable("third")])
    split.abort()
    assert stopped == ["first", "third"]
    split.close()  # none of them can be closed: closing passes over them
    assert split.backend == "Stoppable"  # a simulator that names no backend is named by its class


@pytest.mark.ngspice
def test_a_recovery_in_a_share_is_the_shared_result_s_aid(batch_sim):
    """ngspice recovering its operating point in the shares (a sqrt evaluated out of its domain, then dynamic gmin
    stepping, sim_decks.RECOVERS) is the convergence aid of the shared result, as of one process's."""
    from netloop.sim import BatchSimulator

    runs = (AcRun("a", {"v1": 1.0}, SWEEPS), AcRun("b", {"v1": 2.0}, SWEEPS))
    job = SimJob(RECOVERS, runs=runs, save=("v(f)",), excitable=("v1",))
    alone = batch_sim.run(job)
    both = SplitRunsSimulator([BatchSimulator(), BatchSimulator()]).run(job)
    assert alone.convergence_aid == "ngspice: dynamic gmin stepping" and both.convergence_aid == alone.convergence_aid


def test_without_an_affinity_mask_every_cpu_counts(monkeypatch):
    """Where the platform gives no affinity mask, the CPUs usable are the machine's count (1 when it cannot tell)."""
    def no_mask(pid):
        raise AttributeError("no sched_getaffinity here")

    monkeypatch.setattr(split_module.os, "sched_getaffinity", no_mask)
    monkeypatch.setattr(split_module.os, "cpu_count", lambda: 6)
    assert split_module.usable_cpus() == 6
    monkeypatch.setattr(split_module.os, "cpu_count", lambda: None)
    assert split_module.usable_cpus() == 1
