"""What a worker returns for one task, without ngspice: the record of a measured corner and of each way a corner fails,
on a fake simulator that answers with the closed-form loop gain of an invented two-pole loop (tests/two_pole_loop.py)."""

from __future__ import annotations

import dataclasses
import math
import os
import socket
import time
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from netloop.errors import NetloopError, SimulationError
from netloop.jobs.corners import check_plan, load_plan, run_task, worker
from netloop.jobs.corners.worker import TaskOptions, close_simulator
from netloop.jobs.document import to_document
from netloop.jobs.measure import Sweep, measure
from netloop.netlist import parse_text
from netloop.sim import AnalyticSimulator, Change
from two_pole_loop import A0, F1, F2, LOOP as NETLIST

FIXED = Sweep(fmin_hz=1.0, fmax_hz=1e9, fmin_given=True, fmax_given=True)


def _t(freq_hz) -> np.ndarray:
    """T(s) = A0 / ((1 + s/w1)(1 + s/w2)): the return ratio of the invented loop at any break (circuit theory)."""
    s = 2j * math.pi * np.asarray(freq_hz, dtype=float)
    return A0 / ((1 + s / (2 * math.pi * F1)) * (1 + s / (2 * math.pi * F2)))


# the closed-form phase margin: |T(j 2 pi fc)| = 1 solved with scipy's brentq, PM = 180 + angle T(fc) (about 51.9 deg)
FC = brentq(lambda f: abs(_t(f)) - 1.0, F1, 1e9)
PM = 180.0 + math.degrees(np.angle(_t(FC)))


class _Loop(AnalyticSimulator):
    """Answers every break of a job (v(X_drive), v(X), i(SOURCE) in its saves) as an ideal voltage-driven break of the loop
    above: v(X_drive) = -T/(1+T), v(X) = 1/(1+T) per volt of the series source, no current through it."""

    def __init__(self):
        super().__init__({})

    def run(self, job):
        for i, name in enumerate(job.save):
            if name.startswith("i("):
                source, node = name[2:-1], job.save[i - 1][2:-1]
                self.responses[f"v({node}_drive)"] = lambda f, ac, s=source: -_t(f) / (1 + _t(f)) * ac[s]
                self.responses[f"v({node})"] = lambda f, ac, s=source: 1 / (1 + _t(f)) * ac[s]
                self.responses[name] = lambda f, ac: 0 * f
        return super().run(job)


class _Failing:
    """A simulator whose every run raises ``exc``."""

    def __init__(self, exc: BaseException):
        self.exc = exc

    def run(self, job):
        raise self.exc


@pytest.fixture
def task(tmp_path):
    """The plan's one corner (50 C) at n0, and the netlist it names."""
    (tmp_path / "loop.cir").write_text(NETLIST)
    (tmp_path / "plan.toml").write_text(f'netlist = "{tmp_path / "loop.cir"}"\nat = "n0"\n[axes]\ntemp = [50]\n')
    (only,) = check_plan(load_plan(tmp_path / "plan.toml"))
    return only


def _run(task, options: TaskOptions, simulator, monkeypatch) -> tuple[tuple[dict, ...], float]:
    """run_task on this process's worker simulator set to ``simulator``; the records and the wall time of the call."""
    monkeypatch.setattr(worker, "_SIMULATOR", simulator)
    started = time.perf_counter()
    records = run_task(task, options)
    return records, time.perf_counter() - started


def _common(record: dict, task, elapsed: float) -> None:
    """What every record of the task says whatever happened: the task, the plan's settings, this process, the time."""
    assert record["record"] == "corner" and record["key"] == task.key and record["corner"] == "50C"
    assert record["netlist"] == task.corner.netlist and record["settings"] == {"temp": "50"}  # the plan's axis
    assert record["worker"] == f"{socket.gethostname()}:{os.getpid()}"  # this process ran it
    assert 0.0 <= record["seconds"] <= elapsed  # the call's own wall time (time.perf_counter around it) bounds it


MEASURED = [  # options, the outcome they give on the loop above (PM ~51.9 deg, stable, closed form)
    (TaskOptions(sweep=FIXED, requirements=("pm>=60",), timeout_s=42.0), "fail"),  # PM below 60
    (TaskOptions(sweep=FIXED, requirements=("pm>=40",), timeout_s=42.0, share_loads=False), "pass"),
    # one open-loop RHP pole given and no encirclement: Z = N + P = 1 closed-loop RHP pole (Nyquist criterion)
    (TaskOptions(sweep=FIXED, requirements=("pm>=40",), open_loop_rhp_poles=1, method="middlebrook", driver="r1"), "fail"),
]


@pytest.mark.parametrize("options,outcome", MEASURED)
def test_a_measured_corner_is_the_hand_edited_netlist_measured(task, options, outcome, monkeypatch):
    """A measured corner's record holds the loop document of measure() on the netlist edited by hand to the corner (.temp
    50 added), labelled with the corner, with the closed-form phase margin and the outcome the options give, and its
    simulations ran on this worker's simulator under the corner's label, timeout and in-place changes."""
    sim = _Loop()
    (record,), elapsed = _run(task, options, sim, monkeypatch)
    _common(record, task, elapsed)
    assert record["at"] == "n0" and record["outcome"] == outcome and record["error"] is None and record["simulator_output"] is None
    loop = record["loop"]
    assert loop["label"] == "50C" and loop["method"] == options.method
    assert loop["margins"]["phase_margin_deg"] == pytest.approx(PM, abs=0.05)
    assert [r["text"] for r in loop["requirements"]] == list(options.requirements)
    assert loop["loop_gain"]["freq_hz"][0] == 1.0 and loop["loop_gain"]["freq_hz"][-1] == pytest.approx(1e9)  # the sweep given
    assert record["sim_seconds"] == loop["simulation"]["seconds"] and record["loads"] == loop["simulation"]["loads"] == len(sim.jobs)
    assert record["seconds"] >= record["sim_seconds"]
    changes = (Change("temp", "", "50"),) if options.share_loads else ()
    assert sim.jobs and all((j.label, j.timeout_s, j.changes) == ("50C", options.timeout_s, changes) for j in sim.jobs)
    # the reference: the netlist edited by hand, measured by measure() on a fresh fake simulator
    hand = parse_text(NETLIST.replace(".end", ".temp 50\n.end"), source=task.corner.netlist, base_dir=str(Path(task.corner.netlist).parent))
    want = to_document(dataclasses.replace(
        measure(hand, "n0", driver=options.driver, method=options.method, sweep=options.sweep, open_loop_rhp_poles=options.open_loop_rhp_poles,
                requirements=options.requirements, simulator=_Loop()), label="50C"))
    for doc in (loop, want):
        doc["simulation"].pop("seconds"), doc["simulation"].pop("ngspice_seconds")
    assert loop == want


def test_every_loop_of_an_auto_task_is_measured_with_the_plan_options(task, monkeypatch):
    """A task at "auto" measures the loop discovery finds (this circuit has one) with the plan's sweep, requirements,
    open-loop RHP poles and timeout on this worker's simulator: its record is at the break chosen, with the closed-form PM."""
    sim = _Loop()
    options = TaskOptions(sweep=FIXED, requirements=("pm>=40",), open_loop_rhp_poles=1, timeout_s=42.0)
    (record,), elapsed = _run(dataclasses.replace(task, at="auto"), options, sim, monkeypatch)
    _common(record, task, elapsed)
    loop = record["loop"]
    assert record["error"] is None and record["at"] == loop["break"]["node"] in {"out", "n0", "p1", "b1"} and loop["label"] == "50C"
    assert loop["margins"]["phase_margin_deg"] == pytest.approx(PM, abs=0.05)
    assert loop["requirements"][0]["passed"] is True and loop["stability"]["open_loop_rhp_poles"] == 1
    assert record["outcome"] == "fail"  # Z = N + P = 1 (Nyquist criterion), though PM >= 40
    assert loop["loop_gain"]["freq_hz"][0] == 1.0 and loop["loop_gain"]["freq_hz"][-1] == pytest.approx(1e9)
    assert sim.jobs and all(j.timeout_s == 42.0 for j in sim.jobs)
    driven = TaskOptions(sweep=FIXED, driver="r1", method="middlebrook")  # the break's driver given: discovery breaks its node with it
    (record,), _ = _run(dataclasses.replace(task, at="auto"), driven, _Loop(), monkeypatch)
    assert [t.split(".")[0] for t in record["loop"]["break"]["driver_terminals"]] == ["r1"] and record["loop"]["method"] == "middlebrook"


FAILURES = [  # what the simulator raises; the record's error and simulator output (None: none)
    (SimulationError("ngspice stopped", simulator_output="Error on line 3: unknown model"), "ngspice stopped", "Error on line 3: unknown model"),
    (SimulationError("ngspice stopped", simulator_output=""), "ngspice stopped", None),  # no output: None, not ""
    (NetloopError("no operating point"), "no operating point", None),
    (ValueError("boom"), "internal error: ValueError('boom')", "ValueError: boom"),  # a bug: its traceback kept
]


@pytest.mark.parametrize("exc,error,output", FAILURES)
def test_a_corner_that_fails_comes_back_as_an_error_record(task, exc, error, output, monkeypatch):
    """A corner whose simulation raises is one "error" record at the task's node with the exception's message and the
    simulator's output (a bug's traceback), no loop, no simulation time or load count; run_task does not raise."""
    (record,), elapsed = _run(task, TaskOptions(), _Failing(exc), monkeypatch)
    _common(record, task, elapsed)
    assert (record["at"], record["outcome"], record["loop"], record["sim_seconds"], record["loads"]) == ("n0", "error", None, 0.0, None)
    assert record["error"] == error
    if output is not None and isinstance(exc, ValueError):
        assert record["simulator_output"].startswith("Traceback") and record["simulator_output"].rstrip().endswith(output)
    else:
        assert record["simulator_output"] == output


class _Closable:
    closed = 0

    def close(self):
        self.closed += 1


def test_close_simulator_stops_the_worker_simulator_once(monkeypatch):
    """close_simulator closes this process's simulator once and forgets it; one without close(), or none, is just forgotten."""
    sim = _Closable()
    monkeypatch.setattr(worker, "_SIMULATOR", sim)
    close_simulator()
    assert sim.closed == 1 and worker._SIMULATOR is None
    close_simulator()
    assert sim.closed == 1
    monkeypatch.setattr(worker, "_SIMULATOR", object())  # no close(): nothing to call
    close_simulator()
    assert worker._SIMULATOR is None


def test_a_task_whose_worker_fails_is_recorded_as_an_error(task, tmp_path, monkeypatch, capsys):
    """When the worker itself fails (its task raises in Dask, as a lost worker does), the run still records the corner: an
    "error" record with every field a measured corner's record has, the worker's exception in its message, nothing
    measured (no time, no loop, no worker), written to the results file, counted failed on the progress bar; the run
    fails. The task reached the worker with the plan's options, each as the plan file gives it."""
    from distributed import LocalCluster

    from netloop.jobs.corners import read_records, runner

    measure_task = worker.run_task  # what each Dask task (runner.run_chunk) calls

    def lost(task, options, netlists=None):  # run_task's own signature: nothing else may reach it
        if task.corner.name == "50C":
            raise RuntimeError(options)  # the options it was sent come back in the record's message
        return measure_task(task, options, netlists=netlists) if netlists else measure_task(task, options)

    (measured,), _ = _run(task, TaskOptions(sweep=FIXED), _Loop(), monkeypatch)  # the fields of a corner's record
    monkeypatch.setattr(worker, "run_task", lost)
    monkeypatch.setattr(worker, "_SIMULATOR", _Loop())  # the in-process worker's simulator
    (tmp_path / "plan.toml").write_text(
        f'netlist = "{task.corner.netlist}"\nat = "n0"\nmethod = "middlebrook"\ndriver = "r1"\nrequire = ["pm>=40"]\n'
        'open_loop_rhp_poles = 0\ntimeout_s = 42\nshare_loads = false\n[sweep]\nfmin_hz = 1\nfmax_hz = 1e9\npoints_per_decade = 20\n'
        '[axes]\ntemp = [50, 60]\n')
    plan = load_plan(tmp_path / "plan.toml")
    task, measured_task = check_plan(plan)
    sent = TaskOptions(method="middlebrook", driver="r1", sweep=Sweep(fmin_hz=1.0, fmax_hz=1e9, points_per_decade=20, fmin_given=True,
                                                                       fmax_given=True),
                       open_loop_rhp_poles=0, requirements=("pm>=40",), timeout_s=42.0, share_loads=False)
    capsys.readouterr()
    with LocalCluster(n_workers=1, processes=False, threads_per_worker=1, dashboard_address=None) as cluster:  # in this process
        run = runner.run_tasks(plan, (task, measured_task), cluster=cluster.scheduler_address, out=tmp_path / "r.jsonl", progress=True)
    record, passed = run.records
    assert set(record) == {*measured, "inputs"}
    _common({**record, "worker": measured["worker"]}, task, 0.0)
    assert (record["at"], record["outcome"], record["error"]) == ("n0", "error", f"the worker failed: {RuntimeError(sent)!r}")
    assert (record["seconds"], record["sim_seconds"], record["loads"], record["worker"], record["loop"], record["simulator_output"]) == (
        0.0, 0.0, None, None, None, None)
    assert passed["corner"] == "60C" and passed["outcome"] == "pass"  # PM ~51.9 deg >= 40, P = 0 given: the other task measured
    assert [r for r in read_records(tmp_path / "r.jsonl")[0] if r["record"] == "corner"] == [record, passed]
    assert run.verdict == "fail" and (run.counts["error"], run.counts["pass"], run.workers) == (1, 1, 1)
    bar = capsys.readouterr().err.split("\r")[-1]  # the bar's last state: the lost task's loads unknown, the other's counted
    assert f"] 2/2 corners, 1 failed, {passed['loads']} loads (0 corners on a loaded circuit), " in bar and passed["loads"] > 0


def test_a_worker_forgets_each_result_once_the_run_has_it(task, tmp_path, monkeypatch):
    """A Dask worker holds a task's records only until the run has fetched them: when each of 16 tasks starts, the worker
    holds at most 4 results (distributed's Worker.data, read inside the task), where it held every earlier one
    (up to 15) while the run kept all its futures; a statistical run of many samples grew each worker by about 29 kB a
    sample that way (measured on the sky130 bench)."""
    from distributed import LocalCluster, get_worker

    from netloop.jobs.corners import runner

    measure_task = worker.run_task  # what each Dask task (runner.run_chunk) calls
    counts = tmp_path / "held.txt"  # Dask sends the task a copy of this function: what it sees comes back through a file

    def counting(task, options, netlists=None):  # run_task's own signature
        with counts.open("a") as fh:
            fh.write(f"{len(get_worker().data)}\n")
        time.sleep(0.05)  # the run's fetch of the task before (a message to the scheduler and back) has time to end
        return measure_task(task, options, netlists=netlists) if netlists else measure_task(task, options)

    monkeypatch.setattr(worker, "run_task", counting)
    monkeypatch.setattr(worker, "_SIMULATOR", _Loop())  # the in-process worker's simulator
    temps = ", ".join(str(10 * i) for i in range(16))
    (tmp_path / "plan.toml").write_text(f'netlist = "{task.corner.netlist}"\nat = "n0"\nshare_loads = false\n[axes]\ntemp = [{temps}]\n')
    plan = load_plan(tmp_path / "plan.toml")
    with LocalCluster(n_workers=1, processes=False, threads_per_worker=1, dashboard_address=None) as cluster:  # in this process
        run = runner.run_tasks(plan, check_plan(plan), cluster=cluster.scheduler_address, out=tmp_path / "r.jsonl")
    held = [int(line) for line in counts.read_text().split()]
    assert len(run.records) == 16 and len(held) == 16
    assert max(held) <= 4, held  # steadily 2 here: the netlists sent to every worker, and the task just before
