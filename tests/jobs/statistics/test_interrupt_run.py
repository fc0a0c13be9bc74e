"""Ctrl-C during a statistical run, for real: ngspice measures the samples on a local Dask cluster, SIGINT arrives
mid-run, and every sample finished by then is in the results file, nothing after; --resume measures the rest, each
sample's T bit for bit as an uninterrupted run gives it. From a terminal, the whole process group gets the signal: the
workers and their ngspice go on, netloop stops them, and the user reads two lines, no traceback.

The circuit is an invented behavioural loop (tests/two_pole_loop.py) whose error amplifier's gain is drawn by agauss,
so that every sample's T is its own seed's (the ngspice manual, "Statistical circuit analysis")."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time

import pytest

from netloop.errors import Interrupted
from netloop.jobs.corners import runner
from netloop.jobs.corners.runner import local_cluster
from netloop.jobs.statistics import load_sample_plan, run_samples
from two_pole_loop import ELEMENTS  # tests/two_pole_loop.py (tests/ is on the path with its conftest)

pytestmark = pytest.mark.ngspice

SAMPLES = 40
ENTRY = "import sys; from netloop.cli.main import entry; sys.argv[0] = 'netloop'; entry()"  # the console command
NETLIST = "invented loop, its amplifier's gain drawn by agauss\n" + ELEMENTS.replace(
    "e0 n0 0 ref out 1000", "e0 n0 0 ref out {agauss(1000, 300, 3)}") + ".end\n"


def _plan(folder, count: int = SAMPLES):
    (folder / "loop.cir").write_text(NETLIST)
    (folder / "plan.toml").write_text(f'netlist = "loop.cir"\nat = "out"\nrequire = ["pm >= 52"]\n[samples]\ncount = {count}\n')
    return folder / "plan.toml"


def _written(path) -> dict[str, dict]:
    """The sample records of a results file, by sample name (the header left out)."""
    lines = [json.loads(line) for line in path.read_text().splitlines()]
    return {r["corner"]: r for r in lines if r.get("record") == "corner"}


@pytest.fixture(scope="module")
def scheduler():
    """A local Dask cluster of two worker processes, as `netloop yield --workers 2` starts it."""
    with local_cluster(2) as cluster:
        yield cluster.scheduler_address


def test_a_stopped_run_keeps_every_finished_sample_and_resume_measures_the_rest(tmp_path, scheduler, monkeypatch):
    """The first record written raises SIGINT in this process. Chunks of five samples a Dask task (SAMPLE_CHUNK,
    chunk_size), so each worker then holds samples it finished and not yet handed back: they reach the results file
    before the run stops, more than were written when the signal came, and fewer than all. The file's records are
    whole; resume measures exactly the samples missing, and every sample's T equals an uninterrupted run's."""
    plan = load_sample_plan(_plan(tmp_path))
    assert runner.chunk_size(SAMPLES // 2, 8) == 5
    reference = run_samples(plan, cluster=scheduler, out=tmp_path / "whole.jsonl").whole_records()
    advance, at_signal = runner.Progress.advance, []

    def advance_then_interrupt(bar, *args, **kwargs):
        advance(bar, *args, **kwargs)
        if not at_signal:
            at_signal.append(bar.done)
            signal.raise_signal(signal.SIGINT)  # as Ctrl-C: the handler runs here, in the main thread

    monkeypatch.setattr(runner.Progress, "advance", advance_then_interrupt)
    out, before = tmp_path / "stopped.jsonl", signal.getsignal(signal.SIGINT)
    with pytest.raises(Interrupted) as stopped:
        run_samples(plan, cluster=scheduler, out=out)
    kept = _written(out)
    assert at_signal[0] < len(kept) < SAMPLES
    assert str(stopped.value) == f"{len(kept)} of {SAMPLES} samples are in {out}; the same command with --resume measures the rest"
    assert all(r["outcome"] in ("pass", "fail") and r["loop"] is not None for r in kept.values())  # each measured whole
    assert signal.getsignal(signal.SIGINT) is before  # netloop's handler gone with the run
    monkeypatch.setattr(runner.Progress, "advance", advance)
    resumed = run_samples(plan, cluster=scheduler, out=out, resume=True)
    assert resumed.run.ran == SAMPLES - len(kept) and resumed.run.skipped == len(kept)
    whole = {r["corner"]: r["loop"]["loop_gain"] for r in reference}
    assert {name: r["loop"]["loop_gain"] for name, r in _written(out).items()} == whole
    assert len({json.dumps(t["re"][:1]) for t in whole.values()}) == SAMPLES  # each sample its own draw


def test_local_workers_ignore_interrupts_also_when_started_again():
    """A terminal's Ctrl-C reaches every process of its group: the local cluster's workers ignore it, those its nanny
    starts again after a crash too (the preload), while netloop's own handler is back in place."""
    from distributed import Client

    before = signal.getsignal(signal.SIGINT)
    with local_cluster(1) as cluster, Client(cluster) as client:
        assert signal.getsignal(signal.SIGINT) is before
        assert list(client.run(signal.getsignal, signal.SIGINT).values()) == [signal.SIG_IGN]
        client.restart()
        assert list(client.run(signal.getsignal, signal.SIGINT).values()) == [signal.SIG_IGN]


def test_ctrl_c_in_a_terminal_stops_the_run_with_two_lines_and_no_traceback(tmp_path):
    """`netloop yield` in a process group of its own, as a terminal runs it; SIGINT to the whole group once the results
    file has its first samples: exit status 130, the note that the samples in progress finish and the count kept, no
    traceback from netloop, its Dask workers or their ngspice, and no process of the group left behind."""
    plan = _plan(tmp_path, count=2000)
    out = tmp_path / "plan.results.jsonl"
    run = subprocess.Popen([sys.executable, "-c", ENTRY, "yield", str(plan), "--workers", "2"], stdout=subprocess.PIPE,
                           stderr=subprocess.PIPE, text=True, start_new_session=True)
    deadline = time.monotonic() + 120
    while not (out.exists() and len(out.read_text().splitlines()) > 2) and run.poll() is None and time.monotonic() < deadline:
        time.sleep(0.05)
    os.killpg(run.pid, signal.SIGINT)
    _, err = run.communicate(timeout=60)
    kept = _written(out)
    assert run.returncode == 130, err
    assert err.splitlines() == ["", "netloop: stopping: the samples in progress finish and go to the results file; Ctrl-C "
                                "again to stop at once", f"netloop: interrupted: {len(kept)} of 2000 samples are in {out}; the "
                                "same command with --resume measures the rest"]
    assert 0 < len(kept) < 2000
    for _ in range(100):  # the cluster's processes and their ngspice end with the run
        try:
            os.killpg(run.pid, 0)
        except ProcessLookupError:
            break
        time.sleep(0.1)
    else:
        pytest.fail("processes of the run's group are still running")
