"""Corners that differ only in values ngspice changes in place share one loaded circuit, with the margins of a fresh load
and of `netloop check` on the netlist edited by hand to each corner."""

from __future__ import annotations

import itertools
import re
from collections import Counter
from pathlib import Path

import numpy as np
import pytest

from netloop.jobs.corners import check_plan, load_plan, run_plan, run_task
from netloop.jobs.corners.runner import load_groups, local_cluster, share_out
from netloop.jobs.corners.worker import TaskOptions, close_simulator
from netloop.jobs.measure import measure
from netloop.sim import default_simulator

ROOT = Path(__file__).resolve().parents[3]
MILLER = ROOT / "circuits" / "miller_buffer.cir"


def _t(loop: dict) -> tuple[np.ndarray, np.ndarray]:
    gain = loop["loop_gain"]
    return np.asarray(gain["freq_hz"]), np.asarray(gain["re"]) + 1j * np.asarray(gain["im"])


def _tasks(tmp_path: Path, body: str, netlist: Path = MILLER):
    path = tmp_path / "plan.toml"
    path.write_text(f'netlist = "{netlist}"\nat = "out"\n{body}')
    plan = load_plan(path)
    return plan, check_plan(plan)


def test_groups_are_the_corners_one_load_serves(tmp_path):
    """Corners group by everything but temperature, supply and .param values (and the set of those they change); without
    share_loads each corner is a group of its own."""
    plan, tasks = _tasks(tmp_path, '[axes]\nlib = ["tt", "ss"]\ntemp = [0, 50]\nsupply.vdd = [3.0, 3.6]\n\n'
                                   '[[corner]]\nlib = "ss"\ntemp = 80\n\n[[corner]]\nlib = "ss"\ntemp = 90\nsupply.vdd = 3.3\n')
    groups = load_groups(list(tasks))
    assert [[t.corner.name for t in g] for g in groups] == [
        [t.corner.name for t in tasks[:4]], [*(t.corner.name for t in tasks[4:8]), tasks[9].corner.name], [tasks[8].corner.name]]
    assert len(load_groups(list(tasks), share_loads=False)) == len(tasks)


def test_share_out_deals_the_largest_chunk_first_and_leaves_spare_workers_idle():
    """Chunks go out largest first, each to the worker with the least work so far (a load counting as 10 corners): the
    longest-processing-time-first rule (Graham 1969), worked by hand for groups of 5, 1, 1, 1 on two workers (work 15 | 11,
    then 15 | 22, then 26 | 22); three one-task groups on four workers leave one worker idle, none split further."""
    a, b, c, d = ["a1", "a2", "a3", "a4", "a5"], ["b"], ["c"], ["d"]
    assert share_out([b, a, c, d], 2) == [a + d, b + c]
    assert share_out([b, c, d], 4) == [b, c, d, []]
    assert share_out([b, c, d], 0) == []  # no worker: nothing is dealt (common practice)
    # one group of two corners on two workers is split, one corner each: a worker left idle would double the run's time
    assert share_out([["e1", "e2"]], 2) == [["e1"], ["e2"]]


def test_share_out_keeps_groups_whole_and_spreads_the_loads(tmp_path):
    """Three groups of six on two workers: four chunks (the largest split), two loads and nine corners per worker, each
    chunk in plan order; one worker takes every group whole, in order."""
    _, tasks = _tasks(tmp_path, '[axes]\nlib = ["tt", "ss", "ff"]\ntemp = [-40, 27, 125]\nsupply.vdd = [3.0, 3.6]\n')
    groups = load_groups(list(tasks))
    two = share_out(groups, 2)
    assert sorted(len(w) for w in two) == [9, 9]
    for w in two:
        runs = [k for k, _ in itertools.groupby(t.corner.settings[0].value for t in w)]
        assert len(runs) == 2  # two loads each: two unbroken runs of one section
    assert share_out(groups, 1) == [list(tasks)]
    assert sorted(len(w) for w in share_out(load_groups(list(tasks), share_loads=False), 2)) == [9, 9]


def test_workers_take_the_netlists_the_plan_check_read_while_their_files_are_unchanged(tmp_path, monkeypatch):
    """A worker given checked_plan's netlists reads no netlist for the corners they cover and builds the same corner
    netlist as its own read; once the netlist file changes (size and modification time, os.stat) it reads it again."""
    from netloop.jobs.corners.runner import checked_plan
    from netloop.jobs.corners import worker
    from netloop.netlist import parse_file, write_netlist

    netlist = tmp_path / "miller.cir"
    netlist.write_text(MILLER.read_text())
    (tmp_path / "models").symlink_to(MILLER.parent / "models")
    path = tmp_path / "plan.toml"
    path.write_text(f'netlist = "{netlist}"\nat = "out"\n[axes]\nlib = ["tt", "ss"]\ntemp = [0, 50]\n')
    tasks, netlists = checked_plan(load_plan(path))
    assert set(netlists) == {worker.read_key(t.corner) for t in tasks} and len(netlists) == 2
    reads = []
    monkeypatch.setattr(worker, "parse_file", lambda p: reads.append(p) or parse_file(p))
    monkeypatch.setattr(worker, "_READ", {})
    own = [write_netlist(worker.corner_netlist(t.corner)) for t in tasks]  # the reference: the worker's own read
    assert reads == [str(netlist)]
    worker._READ.clear()
    worker.use_netlists(netlists)
    try:
        assert [write_netlist(worker.corner_netlist(t.corner)) for t in tasks] == own and reads == [str(netlist)]
        worker._READ.clear()
        netlist.write_text(MILLER.read_text().replace("\n.end", "\n.param edited=1\n.end"))
        changed = write_netlist(worker.corner_netlist(tasks[0].corner))
        assert reads == [str(netlist)] * 2 and ".param edited=1" in changed and changed != own[0]
    finally:
        worker.use_netlists(None)


def test_run_task_builds_its_corner_from_the_netlists_it_is_sent(tmp_path, monkeypatch):
    """run_task's ``netlists`` (checked_plan's) serve its corner: no netlist is parsed while they are given, the
    worker's own read happens without them (parse_file calls counted; the simulation itself fails here, by design)."""
    from two_pole_loop import LOOP

    from netloop.errors import NetloopError
    from netloop.jobs.corners import worker
    from netloop.jobs.corners.runner import checked_plan
    from netloop.netlist import parse_file

    class Refusing:
        def run(self, job):
            raise NetloopError("not simulated")

    (tmp_path / "loop.cir").write_text(LOOP)
    (tmp_path / "plan.toml").write_text(f'netlist = "{tmp_path / "loop.cir"}"\nat = "n0"\n[axes]\ntemp = [0]\n')
    (task,), netlists = checked_plan(load_plan(tmp_path / "plan.toml"))
    reads = []
    monkeypatch.setattr(worker, "parse_file", lambda p: reads.append(p) or parse_file(p))
    monkeypatch.setattr(worker, "_SIMULATOR", Refusing())
    monkeypatch.setattr(worker, "_GIVEN", {})
    for given, read in ((netlists, []), (None, [task.corner.netlist])):
        monkeypatch.setattr(worker, "_READ", {})
        (record,) = run_task(task, TaskOptions(), netlists=given)
        assert record["error"] == "not simulated" and reads == read


@pytest.mark.ngspice
def test_shared_loads_give_every_corner_the_results_of_a_fresh_load_bit_for_bit(tmp_path):
    """Sixteen corners of one section (temperature, supply, a .param, an element's value) run one after the other in one
    worker: with share_loads one load serves all sixteen and each corner's sampled T and margins are bit for bit those of
    one load per corner (ngspice's own fresh load is the reference)."""
    plan, tasks = _tasks(tmp_path, '[axes]\ntemp = [-40, 125]\nsupply.vdd = [3.0, 3.6]\nparam.cc = ["0.9p", "1.5p"]\n'
                                   'element.cl = ["2p", "4.7p"]\n')
    records = {}
    for share in (True, False):
        close_simulator()
        records[share] = [run_task(t, TaskOptions(share_loads=share))[0] for t in tasks]
    close_simulator()
    assert [r["loads"] for r in records[True]] == [1] + [0] * 15
    assert [r["loads"] for r in records[False]] == [1] * 16
    for shared, fresh in zip(records[True], records[False]):
        f1, t1 = _t(shared["loop"])
        f2, t2 = _t(fresh["loop"])
        assert np.array_equal(f1, f2) and np.array_equal(t1, t2), shared["corner"]
        assert shared["loop"]["margins"] == fresh["loop"]["margins"]
    assert len({r["loop"]["margins"]["phase_margin_deg"] for r in records[True]}) == 16  # every corner really differs


# circuits/sky130/ldo.cir (an invented regulator on sky130 cards) with its supply at its reference: at node gate the rules'
# split measures no loop, so every corner doubts it and measures the other placement of the cascode xm2 too.
LDO = ROOT / "circuits" / "sky130" / "ldo.cir"


@pytest.mark.ngspice
def test_corners_that_doubt_their_split_measure_the_other_split_on_the_shared_load(tmp_path):
    """Two corners (temperature; the supply changed too) of a regulator whose split is doubted at each run in one worker on one
    load: the other placement of the bridge is measured on the same loaded circuit (both probes in one netlist,
    netloop.probe.chain), and each corner's T, margins and checks are bit for bit those of one load per corner and those
    of `netloop check` (measure) on the netlist edited by hand to that corner (ngspice's fresh loads are the reference)."""
    plan = tmp_path / "plan.toml"
    plan.write_text(f'netlist = "{LDO}"\nat = "gate"\n\n[axes]\ntemp = [27, 85]\nsupply.vsup = [0.9]\n')
    tasks = check_plan(load_plan(plan))
    records = {}
    for share in (True, False):
        close_simulator()
        records[share] = [run_task(t, TaskOptions(share_loads=share))[0] for t in tasks]
    close_simulator()
    assert [r["loads"] for r in records[True]] == [1, 0]
    assert [r["loads"] for r in records[False]] == [1, 1]
    simulator = default_simulator()
    try:
        for i, (shared, fresh) in enumerate(zip(records[True], records[False])):
            assert [c["name"] for c in shared["loop"]["checks"] if not c["passed"]][-1:] == ["split"], shared["corner"]
            assert shared["loop"]["checks"] == fresh["loop"]["checks"] and shared["loop"]["margins"] == fresh["loop"]["margins"]
            f1, t1 = _t(shared["loop"])
            f2, t2 = _t(fresh["loop"])
            assert np.array_equal(f1, f2) and np.array_equal(t1, t2), shared["corner"]
            edited = tmp_path / f"corner{i}.cir"  # reading the same process file by its absolute path
            edited.write_text(_hand_edited(LDO, shared["settings"], [(".lib process.spice tt", f".lib {LDO.with_name('process.spice')} tt")]))
            check = measure(edited, "gate", simulator=simulator)
            assert np.array_equal(check.analysis.freq_hz, f1) and np.array_equal(check.analysis.t, t1), shared["corner"]
    finally:
        simulator.close()


@pytest.fixture(scope="module")
def scheduler():
    """A local Dask cluster of two worker processes, as `netloop corners --jobs 2` starts it."""
    with local_cluster(2) as cluster:
        yield cluster.scheduler_address


def _hand_edited(path: Path, settings: dict[str, str], edits) -> str:
    """The netlist text edited by hand to a corner: the edits of its process, the supply's DC value, a .temp line."""
    text = path.read_text()
    for old, new in edits:
        text = text.replace(old, new)
    for key, value in settings.items():
        if key.startswith("supply."):
            name = key.split(".", 1)[1]
            text, found = re.subn(rf"(?im)^({name}\s+\S+\s+\S+\s+dc)\s+\S+", rf"\g<1> {value}", text)
            assert found == 1
    return text.replace("\n.end", f"\n.temp {settings['temp']}\n.end")


def _compare_with_hand_edits(records, netlist: Path, at: str, driver: str | None, edits_of) -> None:
    """Each corner's T equals that of `netloop check` (measure) on the netlist edited by hand, to 1e-9 relative."""
    simulator = default_simulator()
    try:
        for i, r in enumerate(records):
            edited = netlist.parent / f"corner{i}.cir"  # beside the netlist: its relative paths hold
            edited.write_text(_hand_edited(netlist, r["settings"], edits_of(r["settings"])))
            check = measure(edited, at, driver=driver, simulator=simulator)
            f, t = _t(r["loop"])
            np.testing.assert_allclose(check.analysis.freq_hz, f, rtol=1e-12, err_msg=r["corner"])
            np.testing.assert_allclose(check.analysis.t, t, rtol=1e-9, atol=0, err_msg=r["corner"])
    finally:
        simulator.close()


@pytest.mark.ngspice
def test_families_plan_equals_check_on_netlists_edited_by_hand(tmp_path, scheduler):
    """Every corner of circuits/plans/families_corners.toml (three .lib lines of one invented file per process corner,
    temperature, supply), run on two workers with shared loads, has the T of `netloop check` on the netlist edited by hand
    to that corner (relative 1e-9); the 18 corners took 4 loads, each worker running its corners of one section together."""
    plan = load_plan(ROOT / "circuits" / "plans" / "families_corners.toml")
    run = run_plan(plan, cluster=scheduler, out=tmp_path / "families.jsonl")
    assert run.counts["error"] == 0 and len(run.records) == 18
    assert sum(r["loads"] for r in run.records) == 4
    assert all(n == 2 for n in Counter(r["worker"] for r in run.records for _ in range(r["loads"])).values())
    sections = {"typical": ("typical", "res_typical", "cap_typical"), "slow": ("slow", "res_high", "cap_high"),
                "fast": ("fast", "res_low", "cap_low")}
    netlist = tmp_path / "circuits" / "miller_families.cir"
    netlist.parent.mkdir()
    netlist.write_text((ROOT / "circuits" / "miller_families.cir").read_text())
    (netlist.parent / "models").symlink_to(ROOT / "circuits" / "models")

    def edits(settings):
        new = sections[settings["process"]]
        return [(f"families.lib {old}\n", f"families.lib {n}\n") for old, n in zip(sections["typical"], new)]

    _compare_with_hand_edits(run.records, netlist, "out", None, edits)


def _sky130_by_file(tmp_path: Path) -> Path:
    """circuits/sky130/ldo.cir with its `.lib process.spice tt` line replaced by the tt section's own lines: the sky130
    model files included one by one, the corner in their names (absolute paths into the installed process)."""
    process = (ROOT / "circuits" / "sky130" / "process.spice").read_text()
    section = re.search(r"^\.lib tt\n(.*?)^\.endl tt", process, flags=re.MULTILINE | re.DOTALL)[1]
    section = section.replace('"../../.venv', f'"{ROOT}/.venv')
    netlist = tmp_path / "ldo_files.cir"
    netlist.write_text((ROOT / "circuits" / "sky130" / "ldo.cir").read_text().replace(".lib process.spice tt\n", section))
    return netlist


@pytest.mark.ngspice
def test_sky130_include_corners_equal_check_on_netlists_edited_by_hand(tmp_path, scheduler):
    """The sky130 regulator including its model files one by one, corners chosen by the corner word of the files' names
    (ss, ff) at two temperatures, sharing loads: each corner has the T of `netloop check` on the netlist with its include
    lines edited by hand (relative 1e-9)."""
    netlist = _sky130_by_file(tmp_path)
    plan_path = tmp_path / "plan.toml"
    plan_path.write_text(f'netlist = "{netlist}"\nat = "fb"\ndriver = "r1.n,r2.p"\n\n'
                         '[axes]\ninclude.tt = ["ss", "ff"]\ntemp = [-40, 125]\nsupply.vsup = [1.7]\n')
    run = run_plan(load_plan(plan_path), cluster=scheduler, out=tmp_path / "sky130.jsonl")
    assert run.counts["error"] == 0 and len(run.records) == 4
    assert sum(r["loads"] for r in run.records) <= 3

    def edits(settings):
        word = settings["include.tt"]
        return [("__nfet_01v8__tt.pm3", f"__nfet_01v8__{word}.pm3"), ("__pfet_01v8__tt.corner", f"__pfet_01v8__{word}.corner")]

    _compare_with_hand_edits(run.records, netlist, "fb", "r1.n,r2.p", edits)


@pytest.mark.ngspice
def test_sky130_plan_sections_equal_check_on_netlists_edited_by_hand(tmp_path, scheduler):
    """Corners of circuits/plans/sky130_ldo_corners.toml (the regulator's process.spice section, temperature, supply),
    sharing loads, have the T of `netloop check` on the netlist edited by hand (relative 1e-9); six of them, to keep the
    test short."""
    demo = load_plan(ROOT / "circuits" / "plans" / "sky130_ldo_corners.toml")
    plan_path = tmp_path / "plan.toml"
    plan_path.write_text(f'netlist = "{demo.netlist}"\nat = "fb"\ndriver = "r1.n,r2.p"\n\n'
                         '[axes]\nlib = ["ss", "ff"]\ntemp = [-40, 27, 125]\nsupply.vsup = [1.9]\n')
    run = run_plan(load_plan(plan_path), cluster=scheduler, out=tmp_path / "sections.jsonl")
    assert run.counts["error"] == 0 and len(run.records) == 6
    assert sum(r["loads"] for r in run.records) == 2

    netlist = tmp_path / "ldo.cir"  # a copy reading the same process file by its absolute path
    process = ROOT / "circuits" / "sky130" / "process.spice"
    netlist.write_text(Path(demo.netlist).read_text().replace(".lib process.spice tt\n", f".lib {process} tt\n"))

    def edits(settings):
        return [(f"{process} tt\n", f"{process} {settings['lib']}\n")]

    _compare_with_hand_edits(run.records, netlist, "fb", "r1.n,r2.p", edits)


@pytest.mark.ngspice
@pytest.mark.parametrize("share", [True, False])
def test_progress_and_summary_count_the_loads(tmp_path, scheduler, capsys, share):
    """`netloop corners --progress` on two sections x two temperatures: the bar and the summary say how often ngspice read
    the netlist and how many corners ran on a loaded circuit: two loads (one per section, the plan's only load-needing
    axis) with share_loads, four without, as the records' own counts say; the corners go to the workers as share_out deals
    the load groups (one a corner without share_loads)."""
    from netloop.cli.main import main
    from netloop.jobs.corners import read_records

    plan = tmp_path / "plan.toml"
    plan.write_text(f'netlist = "{MILLER}"\nat = "out"\nshare_loads = {str(share).lower()}\n\n'
                    '[axes]\nlib = ["tt", "ss"]\ntemp = [27, 85]\n')
    out = tmp_path / "r.jsonl"
    assert main(["corners", str(plan), "--cluster", scheduler, "--out", str(out), "--progress"]) == 0
    printed = capsys.readouterr()
    records = [r for r in read_records(out)[0] if r["record"] == "corner"]
    loads, shared = (2, 2) if share else (4, 0)
    assert sum(r["loads"] for r in records) == loads and sum(r["loads"] == 0 for r in records) == shared
    assert f"4/4 corners, 0 failed, {loads} loads ({shared} corners on a loaded circuit)" in printed.err.split("\r")[-1]
    # which corners ran on one worker, worked by hand from share_out's rule: with share_loads each section's load group
    # whole on a worker of its own; without, four one-corner groups dealt out in turn
    together = sorted(sorted(r["corner"] for r in records if r["worker"] == w) for w in {r["worker"] for r in records})
    assert together == ([["ss/27C", "ss/85C"], ["tt/27C", "tt/85C"]] if share else [["ss/27C", "tt/27C"], ["ss/85C", "tt/85C"]])
    summary = f"circuit loads: {loads} for 4 corners"
    if share:
        summary += "; 2 ran on a circuit another corner had loaded, with its temperature, supplies, parameters or element values changed in place (share_loads)"
    assert summary + "\n" in printed.out



def test_the_progress_bar_has_thirty_cells_and_fills_by_the_share_done():
    """The bar is 30 cells unless told (netloop/jobs/corners/progress.py) and fills by the share done: 2 of 4 is 15 of 30."""
    from io import StringIO

    from netloop.jobs.corners.progress import Progress

    out = StringIO()
    bar = Progress(4, enabled=True, stream=out)
    bar.advance(False)
    bar.advance(True)
    assert out.getvalue().split("\r")[-1].startswith("[" + "#" * 15 + "." * 15 + "] 2/4 corners, 1 failed")


class _Finished:
    """A Dask future that has finished: its result, or the error fetching it raises (a worker lost with the data)."""

    status = "finished"

    def __init__(self, value):
        self.value = value

    def result(self):
        if isinstance(self.value, Exception):
            raise self.value
        return self.value


class _LostData:
    """A Dask client whose fetch of several results at once fails, as when one of the workers holding them is lost."""

    def gather(self, futures):
        raise OSError("worker lost")


def test_a_failed_fetch_of_a_batch_fetches_each_result_alone():
    """When fetching a batch fails, each finished future is fetched alone: its records, or None where that fetch fails too
    (runner._fetch's contract; the caller records None as a corner whose worker failed)."""
    from netloop.jobs.corners.runner import _fetch

    kept, lost = _Finished(({"record": "corner", "key": "a"},)), _Finished(OSError("gone"))
    assert _fetch(_LostData(), [kept, lost]) == [(kept, kept.value), (lost, None)]


def test_the_progress_bar_estimates_the_time_left_at_the_rate_so_far():
    """The estimate is the time so far per corner done times the corners left (a constant rate): 1 of 4 done after 10 s
    leaves about 30 s."""
    import time
    from io import StringIO

    from netloop.jobs.corners.progress import Progress

    out = StringIO()
    bar = Progress(4, enabled=True, stream=out)
    bar.started = time.monotonic() - 10.0
    bar.advance(False)
    elapsed, left = map(int, re.search(r", (\d+) s, about (\d+) s left\s*$", out.getvalue()).groups())
    assert elapsed >= 10 and abs(left - 3 * elapsed) <= 2  # whole seconds as shown


def test_run_tasks_draws_no_progress_bar_unless_asked(tmp_path, capsys):
    """A library call of run_tasks writes nothing to stderr unless progress is asked for, as run_plan (the CLI asks only for
    a terminal or --progress, netloop/cli/corners_cmd.py)."""
    from netloop.jobs.corners.runner import run_tasks

    plan, _ = _tasks(tmp_path, '[axes]\ntemp = [27]\n')
    run = run_tasks(plan, (), out=tmp_path / "r.jsonl")
    assert run.records == () and capsys.readouterr().err == ""
