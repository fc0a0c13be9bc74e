"""The samples of one corner share where and how their node is split (netloop.jobs.corners.worker.sample_decisions):
the same T bit for bit as each sample split afresh, and decisions never outlive a change to the files read."""

from __future__ import annotations

from pathlib import Path

import pytest

from netloop.jobs.corners import worker
from netloop.jobs.corners.worker import TaskOptions, corner_netlist, run_task, sample_decisions
from netloop.jobs.statistics import load_sample_plan, rerun_sample
from netloop.jobs.statistics.samples import sample_tasks
from netloop.probe import split_loop

ROOT = Path(__file__).resolve().parents[3]
MILLER = ROOT / "circuits" / "miller_buffer.cir"


def _mismatched_miller(folder: Path) -> Path:
    """The invented Miller buffer with its compensation capacitor drawn by agauss (a mismatch model of our own), its
    model library named by absolute path."""
    text = MILLER.read_text().replace(".param cc=1.2p", ".param cc={agauss(1.2p, 0.3p, 3)}")
    text = text.replace(".lib models/corners.lib", f".lib {MILLER.parent / 'models' / 'corners.lib'}")
    assert "agauss" in text and str(MILLER.parent) in text
    path = folder / "miller_mm.cir"
    path.write_text(text)
    return path


@pytest.mark.ngspice
def test_samples_of_a_corner_reuse_the_split_with_the_t_of_a_fresh_split(tmp_path, monkeypatch):
    """Three samples measured one after the other in one worker share the decisions the first took (its probed netlists,
    the split and the chained other placement of Cc, which the second and third take with their own seed line: the node
    is split once; the sources that bound the operating point); each has the T, margins, break and
    checks of its seed measured alone with a fresh split and a fresh ngspice (rerun_sample, `netloop check --seed`'s
    path), and the seeds' T differ."""
    monkeypatch.setattr(worker, "_DECISIONS", {})
    netlist = _mismatched_miller(tmp_path)
    (tmp_path / "plan.toml").write_text(f'netlist = "{netlist}"\nat = "out"\n[samples]\ncount = 3\n')
    plan = load_sample_plan(tmp_path / "plan.toml")
    import netloop.jobs.measure as measure_module

    splits = []
    monkeypatch.setattr(measure_module, "split_loop", lambda *a, **k: splits.append(a[1]) or split_loop(*a, **k))
    records = [run_task(task, TaskOptions())[0] for task in sample_tasks(plan)]
    assert splits == ["out"]
    (decisions,) = worker._DECISIONS.values()
    assert {key[0] for key in decisions} == {"op-sources", "probes"} and all(v is not None for v in decisions.values())
    from netloop.jobs.document import to_document

    for record in records:
        alone = to_document(rerun_sample(plan, record["corner"])[0])
        assert record["outcome"] == "pass"
        assert alone["loop_gain"] == record["loop"]["loop_gain"]
        assert alone["margins"] == record["loop"]["margins"] and alone["break"] == record["loop"]["break"]
        assert alone["checks"] == record["loop"]["checks"] and any(c["name"] == "operating-point" for c in alone["checks"])
    assert len({tuple(r["loop"]["loop_gain"]["re"]) for r in records}) == 3


def test_decisions_are_kept_per_corner_and_dropped_when_a_file_read_changes(tmp_path, monkeypatch):
    """Samples of one corner get one decisions dict; another corner (another setting), a corner without a seed (None),
    and the same corner after its netlist file changed on disk (size and modification time) get their own."""
    monkeypatch.setattr(worker, "_DECISIONS", {})
    netlist = _mismatched_miller(tmp_path)
    (tmp_path / "plan.toml").write_text(f'netlist = "{netlist}"\nat = "out"\n[axes]\ntemp = [27, 85]\n[samples]\ncount = 2\n')
    tasks = sample_tasks(load_sample_plan(tmp_path / "plan.toml"))
    got = [sample_decisions(t.corner, corner_netlist(t.corner)) for t in tasks]
    assert [t.corner.name for t in tasks] == ["27C#1", "27C#2", "85C#1", "85C#2"]
    assert got[0] is got[1] and got[2] is got[3] and got[0] is not got[2]
    unseeded = tasks[0].corner.__class__(tasks[0].corner.name, tasks[0].corner.netlist,
                                         tuple(s for s in tasks[0].corner.settings if s.kind != "seed"), tasks[0].corner.line)
    assert sample_decisions(unseeded, corner_netlist(unseeded)) is None
    netlist.write_text(netlist.read_text() + "* edited\n")
    assert sample_decisions(tasks[1].corner, corner_netlist(tasks[1].corner)) is not got[1]


def test_the_state_run_task_hands_over_is_the_files_state_of_the_netlist(tmp_path, monkeypatch):
    """The files' state the worker finds while taking a corner's netlist (and gives sample_decisions instead of stating
    the files again) is files_state of that netlist's files, also after a file changed; with it the samples get the
    decisions they get without it (reference: worker.files_state, stated afresh)."""
    monkeypatch.setattr(worker, "_DECISIONS", {})
    netlist = _mismatched_miller(tmp_path)
    (tmp_path / "plan.toml").write_text(f'netlist = "{netlist}"\nat = "out"\n[axes]\nlib = ["tt"]\n[samples]\ncount = 2\n')
    tasks = sample_tasks(load_sample_plan(tmp_path / "plan.toml"))
    for edit in ("", "* edited\n"):
        netlist.write_text(netlist.read_text() + edit)
        for task in tasks:
            taken, state = worker._corner_netlist(task.corner)
            assert state == worker.files_state(taken.files) and len(taken.files) > 1
            assert sample_decisions(task.corner, taken, state) is sample_decisions(task.corner, corner_netlist(task.corner))
