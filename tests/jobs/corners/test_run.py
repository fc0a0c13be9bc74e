"""Corner runs for real: a Dask scheduler and workers on 127.0.0.1, ngspice in each worker, journal, kill and resume."""

from __future__ import annotations

import json
import os
import shutil
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from netloop.cli.main import main
from netloop.jobs.corners import check_plan, load_plan, read_records, run_plan
from netloop.jobs.corners.runner import LOCAL_CLUSTER_CONFIG, local_cluster
from netloop.jobs.measure import measure

ROOT = Path(__file__).resolve().parents[3]
MILLER = ROOT / "circuits" / "miller_buffer.cir"
LIB = ROOT / "circuits" / "models" / "corners.lib"

pytestmark = pytest.mark.ngspice

PLAN = f"""
netlist = "{MILLER}"
at = "out"
require = ["pm >= 60"]

[axes]
lib = ["tt", "ss"]
temp = [-40, 27, 125]

[[corner]]
name = "supply-blown"
supply.vdd = 1e30
"""


@pytest.fixture(scope="module")
def scheduler():
    """A real Dask scheduler with two single-threaded worker processes on 127.0.0.1 (as `netloop corners --jobs 2`
    starts them), shared by this module."""
    with local_cluster(2) as cluster:
        yield cluster.scheduler_address


def test_local_cluster_workers_carry_the_corner_settings(scheduler):
    """The workers of netloop's local cluster run with LOCAL_CLUSTER_CONFIG (no stack sampling, slow monitors), and
    the scheduler sends every corner at once, while this process's own Dask settings stay as they were."""
    import dask
    from distributed import Client

    with Client(scheduler) as client:
        seen = client.run(lambda: {k: dask.config.get(k) for k in LOCAL_CLUSTER_CONFIG})
        on_scheduler = client.run_on_scheduler(lambda dask_scheduler: dask_scheduler.WORKER_SATURATION)
    assert len(seen) == 2 and all(v == LOCAL_CLUSTER_CONFIG for v in seen.values())
    assert on_scheduler == float("inf")
    assert dask.config.get("distributed.worker.profile.enabled") is True  # dask's default, untouched here


def _hand_edited(tmp_path: Path, section: str, temp: str) -> Path:
    """The corner made by hand, the way a designer would: a copy with the .lib word changed and a .temp line."""
    (tmp_path / "models").mkdir(exist_ok=True)
    shutil.copy(LIB, tmp_path / "models" / "corners.lib")
    text = MILLER.read_text().replace(".lib models/corners.lib tt", f".lib models/corners.lib {section}")
    path = tmp_path / f"hand-{section}-{temp}.cir"
    path.write_text(text.replace("\n.end", f"\n.temp {temp}\n.end"))
    return path


def test_cluster_run_matches_direct_measure_and_a_failed_corner_does_not_stop_the_others(tmp_path, scheduler, capsys):
    """Six corners on the Dask workers give exactly the margins measure() finds on hand-edited copies; the 1e30 V supply corner is an error with ngspice's message."""
    plan = tmp_path / "plan.toml"
    plan.write_text(PLAN)
    out, junit, table = tmp_path / "r.jsonl", tmp_path / "j.xml", tmp_path / "t.csv"
    rc = main(["corners", str(plan), "--cluster", scheduler, "--out", str(out), "--json", "--junit", str(junit), "--csv", str(table)])
    doc = json.loads(capsys.readouterr().out)
    assert rc == 1  # a corner failed pm>=60 and one could not be measured
    records, _ = read_records(out)
    corners = [r for r in records if r["record"] == "corner"]
    assert sorted(r["corner"] for r in corners) == sorted(
        ["tt/-40C", "tt/27C", "tt/125C", "ss/-40C", "ss/27C", "ss/125C", "supply-blown"])
    blown = next(r for r in corners if r["corner"] == "supply-blown")
    assert blown["outcome"] == "error" and "did not converge" in blown["error"]  # ngspice's own verdict on the operating point
    assert "ngspice said:" in blown["error"] and blown["simulator_output"]  # with ngspice's message and its output
    assert all(r["worker"].split(":")[1] != str(os.getpid()) for r in corners)  # measured in the workers, not here
    for r in corners:
        if r["corner"] == "supply-blown":
            continue
        section, temp = r["corner"].split("/")
        ref = measure(_hand_edited(tmp_path, section, temp[:-1]), "out", requirements=["pm >= 60"])  # single process, own ngspice
        m = r["loop"]["margins"]
        assert m["phase_margin_deg"] == ref.analysis.margins.phase_margin_deg
        assert m["gain_margin_db"] == ref.analysis.margins.gain_margin_db
        assert m["unity_gain_hz"] == ref.analysis.margins.unity_gain_hz
        assert (r["outcome"] == "pass") == ref.passed
    # the worst corner leads the JSON document; the counts add up
    assert doc["corners"][0]["label"] == "supply-blown"
    pms = [c["loop"]["margins"]["phase_margin_deg"] for c in doc["corners"][1:] if c["verdict"] == "fail"]
    assert pms == sorted(pms) and len(pms) == doc["counts"]["fail"] >= 1
    suite = ET.parse(junit).getroot().find("testsuite")
    assert len(suite.findall("testcase")) == 7
    assert len(suite.findall("testcase/error")) == 1 and len(suite.findall("testcase/failure")) == doc["counts"]["fail"]
    assert len(table.read_text().splitlines()) == 1 + 7


def test_an_existing_results_file_is_never_overwritten_without_resume_or_force(tmp_path, scheduler, capsys):
    """A second run onto the same results file stops with exit 2, says --resume or --force, and leaves the file as it was."""
    plan = tmp_path / "plan.toml"
    plan.write_text(PLAN.split("[[corner]]")[0].replace('temp = [-40, 27, 125]', 'temp = [27]'))
    out = tmp_path / "r.jsonl"
    assert main(["corners", str(plan), "--cluster", scheduler, "--out", str(out), "--progress"]) in (0, 1)
    assert "2/2 corners" in capsys.readouterr().err  # the progress bar, asked for although stderr is not a terminal
    before = out.read_bytes()
    assert main(["corners", str(plan), "--cluster", scheduler, "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "--resume" in err and "--force" in err
    assert out.read_bytes() == before


def test_killed_run_resumes_without_losing_or_repeating_a_corner(tmp_path, scheduler, killed_midway):
    """A `netloop corners` process killed after its first corners are written loses nothing: --resume runs only the rest, each corner once."""
    plan = tmp_path / "plan.toml"
    # a fine sweep makes each corner take about a second, so the kill lands mid-run
    plan.write_text(PLAN.split("[[corner]]")[0] + "\n[sweep]\npoints_per_decade = 200\n")
    out = tmp_path / "r.jsonl"
    done = killed_midway(["corners", str(plan), "--jobs", "1", "--out", str(out)], out, 2)
    assert 2 <= len(done) < 6, "the run was not killed mid-way"
    run = run_plan(load_plan(plan), cluster=scheduler, out=out, resume=True)
    assert run.skipped == len(done) and run.ran == 6 - len(done)
    final = [r for r in read_records(out)[0] if r["record"] == "corner"]
    keys = [r["key"] for r in final]
    assert len(keys) == len(set(keys)) == 6
    assert final[: len(done)] == done  # the finished corners kept their records and were not run again
    assert len(run.records) == 6


def test_automatic_break_nodes_match_loop_discovery_in_one_process(tmp_path, scheduler):
    """at = "auto" measures every loop that netloop.jobs.discover finds, with the same nodes and margins as measure_all_loops here."""
    from netloop.jobs.discover import measure_all_loops

    plan = tmp_path / "plan.toml"
    plan.write_text(f'netlist = "{MILLER}"\nat = "auto"\n\n[axes]\nlib = ["ff"]\n')
    run = run_plan(load_plan(plan), cluster=scheduler, out=tmp_path / "r.jsonl")
    hand = tmp_path / "ff.cir"
    (tmp_path / "models").mkdir()
    shutil.copy(LIB, tmp_path / "models" / "corners.lib")
    hand.write_text(MILLER.read_text().replace(".lib models/corners.lib tt", ".lib models/corners.lib ff"))
    ref, _notes = measure_all_loops(hand)
    assert [r["at"] for r in run.records] == [x.breaks.node for x in ref]
    assert [r["loop"]["margins"]["phase_margin_deg"] for r in run.records] == [x.analysis.margins.phase_margin_deg for x in ref]
    assert all(r["corner"] == "ff" and r["loop"]["label"] == "ff" for r in run.records)


def test_a_corner_swept_below_its_crossover_is_inconclusive_everywhere(tmp_path, scheduler, capsys):
    """A plan whose sweep stops at 1 MHz, below the buffer's 44.7 MHz crossover (check's own result at tt), gives
    inconclusive corners: exit status 3, the self-check and what to try below the table, a JUnit failure of type
    "inconclusive", and no "pass" anywhere."""
    plan = tmp_path / "plan.toml"
    plan.write_text(f'netlist = "{MILLER}"\nat = "out"\n[sweep]\nfmax_hz = "1meg"\n[axes]\ntemp = [27]\n')
    out, junit, table = tmp_path / "r.jsonl", tmp_path / "j.xml", tmp_path / "t.csv"
    rc = main(["corners", str(plan), "--cluster", scheduler, "--out", str(out), "--junit", str(junit), "--csv", str(table)])
    text = capsys.readouterr().out
    assert rc == 3
    row = text.splitlines()[2]
    assert row.startswith("27C") and "inconclusive" in row and "falls-at-top" in row and " pass" not in row
    assert "1 corner: 0 pass, 0 fail a requirement, 0 unstable, 1 inconclusive (no verdict), 0 error (not measured)" in text
    assert "27C: no verdict: the sweep ends at 1e+06 Hz" in text and "try: let the sweep run higher" in text
    case = ET.parse(junit).getroot().find("testsuite/testcase")
    assert case.find("failure").get("type") == "inconclusive" and case.find("error") is None
    assert table.read_text().splitlines()[1].split(",")[2] == "inconclusive"


def test_resume_after_a_model_file_edit_measures_the_corner_again_and_says_which_file(tmp_path, scheduler, capsys):
    """--resume after an edit to the model library a corner reads runs that corner again (its new margins, not the
    old record) and names the edited file; without an edit --resume runs nothing."""
    (tmp_path / "models").mkdir()
    lib = tmp_path / "models" / "corners.lib"
    shutil.copy(LIB, lib)
    net = tmp_path / "buffer.cir"
    shutil.copy(MILLER, net)
    plan = tmp_path / "plan.toml"
    plan.write_text(f'netlist = "{net}"\nat = "out"\n[axes]\nlib = ["tt"]\n')
    out = tmp_path / "r.jsonl"
    args = ["corners", str(plan), "--cluster", scheduler, "--out", str(out), "--json"]
    assert main(args) in (0, 1)
    first = json.loads(capsys.readouterr().out)["corners"][0]["loop"]["margins"]["phase_margin_deg"]
    assert main([*args, "--resume"]) in (0, 1)
    again = capsys.readouterr()
    assert json.loads(again.out)["ran"] == 0 and "measured again" not in again.err
    # an edit to the library (a comment: the file changes, the circuit does not)
    lib.write_text(lib.read_text().replace("\n.endl", "\n* edited by hand\n.endl"))
    assert main([*args, "--resume"]) in (0, 1)
    edited = capsys.readouterr()
    doc = json.loads(edited.out)
    assert doc["ran"] == 1 and doc["skipped"] == 0
    assert "1 corner(s) measured again because their input files changed" in edited.err and str(lib) in edited.err
    assert doc["corners"][0]["loop"]["margins"]["phase_margin_deg"] == first  # a comment changes the file, not T


def test_an_unreachable_scheduler_is_one_line_exit_2_and_leaves_no_results_file(tmp_path, capsys):
    """--cluster garbage: one 'netloop: error:' line naming the address, exit status 2, and no results file, so the
    same command can be given again."""
    plan = tmp_path / "plan.toml"
    plan.write_text(f'netlist = "{MILLER}"\nat = "out"\n')
    out = tmp_path / "r.jsonl"
    assert main(["corners", str(plan), "--cluster", "garbage", "--out", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("netloop: error: cannot reach a Dask scheduler at 'garbage'")
    assert not out.exists()


def test_a_local_cluster_has_no_more_workers_than_corners(tmp_path):
    """Without --jobs a run starts one worker process per corner up to the CPUs (common practice: no idle workers), so a
    one-corner plan runs on one worker, and its corner is measured."""
    plan = tmp_path / "one.toml"
    plan.write_text(f'netlist = "{MILLER}"\nat = "out"\n\n[[corner]]\nname = "room"\ntemp = 27\n')
    run = run_plan(load_plan(plan), out=tmp_path / "r.jsonl")
    assert run.workers == 1 and [r["corner"] for r in run.records] == ["room"]


def test_corners_sent_in_chunks_give_the_records_of_one_task_each(tmp_path, scheduler):
    """Sixteen corners on two workers sent two to a Dask task (chunk=2, as the statistics job sends samples) give the
    same outcomes and phase margins as the same corners sent one to a task (the reference run)."""
    from netloop.jobs.corners.runner import chunk_size, run_tasks

    plan_path = tmp_path / "plan.toml"
    plan_path.write_text(f'netlist = "{MILLER}"\nat = "out"\n\n[axes]\nlib = ["tt", "ss"]\ntemp = [-40, -20, 0, 20, 40, 60, 80, 100]\n')
    plan = load_plan(plan_path)
    tasks = check_plan(plan)
    assert chunk_size(len(tasks) // 2, 2) == 2  # eight tasks a worker: two to a Dask task

    def measured(run):
        return [(r["corner"], r["outcome"], r["loop"]["margins"]["phase_margin_deg"] if r["loop"] else None) for r in run.records]

    one = run_tasks(plan, tasks, cluster=scheduler, out=tmp_path / "one.jsonl")
    two = run_tasks(plan, tasks, cluster=scheduler, out=tmp_path / "two.jsonl", chunk=2)
    assert measured(two) == measured(one) and {r["outcome"] for r in one.records} <= {"pass", "fail"}


def test_a_runs_verdict_is_fail_when_any_corner_failed_or_was_not_measured_then_inconclusive_then_pass():
    """CornerRun.verdict, the exit status of `netloop corners`: "fail" when a corner failed or could not be simulated
    (and for a plan that showed nothing), else "inconclusive" when a corner's data supported no verdict, else "pass";
    passed only for "pass"."""
    from netloop.jobs.corners.runner import CornerRun

    def run(*outcomes):
        return CornerRun("plan.toml", "plan.results.jsonl", tuple({"outcome": o} for o in outcomes), ran=len(outcomes), skipped=0)

    cases = {(): "fail", ("pass",): "pass", ("pass", "pass"): "pass", ("pass", "inconclusive"): "inconclusive",
             ("inconclusive", "fail"): "fail", ("pass", "error"): "fail", ("inconclusive", "error"): "fail", ("fail",): "fail"}
    assert {outcomes: run(*outcomes).verdict for outcomes in cases} == cases
    assert [run(*outcomes).passed for outcomes in cases] == [v == "pass" for v in cases.values()]
