"""`netloop yield` for real: the run, its outputs and exit status, a sample rerun alone bit for bit (by --sample and by
`netloop check --seed`), and a killed run resumed without losing or repeating a sample."""

from __future__ import annotations

import json

import pytest

from netloop.cli.main import main
from netloop.jobs.corners import read_records
from netloop.jobs.statistics import load_sample_plan, run_samples

pytestmark = pytest.mark.ngspice

# invented two-pole loop (1 kHz and 100 kHz poles), DC gain K = gm1 * 1e5 * 1e-3 * 1e3 with gm1 ~ N(1e-3, 1e-4)
LOOP = """invented two-pole loop whose first transconductance is drawn by agauss
Vin in 0 dc 0 ac 1
G1 0 n1 in out {agauss(1e-3, 3e-4, 3)}
R1 n1 0 1e5
C1 n1 0 1.5915494309189535e-09
G2 0 n2 n1 0 1e-3
R2 n2 0 1e3
C2 n2 0 1.5915494309189535e-09
E3 out 0 n2 0 1
.end
"""


def _write(tmp_path, samples: int, extra: str = "") -> str:
    (tmp_path / "loop.cir").write_text(LOOP)
    plan = tmp_path / "plan.toml"
    plan.write_text(f'netlist = "loop.cir"\nat = "out"\nrequire = ["pm >= 51.5"]\n{extra}[samples]\ncount = {samples}\nfirst_seed = 11\n')
    return str(plan)


def test_yield_run_writes_every_output_and_exits_by_its_verdict(tmp_path, capsys):
    """Ten samples: the JSON document's counts match the results file, a 99 % target cannot be shown (exit 3 or 1 as the
    bounds decide), and the CSV, both plots and the page are written."""
    plan = _write(tmp_path, 10)
    status = main(["yield", plan, "--workers", "2", "--target", "99%", "--json", "--csv", str(tmp_path / "s.csv"),
                   "--plot", str(tmp_path / "h.png"), "--report", str(tmp_path / "r.html")])
    doc = json.loads(capsys.readouterr().out)
    records = [r for r in read_records(tmp_path / "plan.results.jsonl")[0] if r["record"] == "corner"]
    assert sorted(int(r["settings"]["seed"]) for r in records) == list(range(11, 21))
    passed = sum(r["loop"]["requirements"][0]["passed"] for r in records)
    assert doc["deciding"]["passed"] == passed and doc["deciding"]["samples"] == 10
    assert status == {"fail": 1, "inconclusive": 3}[doc["verdict"]] and doc["verdict"] == ("fail" if passed < 7 else "inconclusive")
    assert len((tmp_path / "s.csv").read_text().splitlines()) == 11
    assert (tmp_path / "h.png").stat().st_size > 10_000 and (tmp_path / "h-scatter.png").stat().st_size > 10_000
    assert "data:image/png" in (tmp_path / "r.html").read_text()
    # the plan cut to six samples and the run resumed: nothing to measure, the statistics of those six, the other four said
    _write(tmp_path, 6)
    main(["yield", plan, "--workers", "1", "--resume", "--json"])
    resumed = capsys.readouterr()
    assert json.loads(resumed.out)["deciding"]["samples"] == 6
    assert resumed.err.splitlines() == ["netloop: 4 record(s) in the results file belong to no sample of this plan (the plan changed "
                                        "since they were written) and were left out of the statistics"]
    # the netlist edited and the run resumed: its six samples are measured again, and stderr says why
    (tmp_path / "loop.cir").write_text(LOOP.replace(".end", "* edited after the run\n.end"))
    main(["yield", plan, "--workers", "1", "--resume", "--json"])
    again = capsys.readouterr().err.splitlines()
    assert again[0].startswith("netloop: 6 sample(s) measured again because their input files changed since they were recorded: ")
    assert again[0].endswith("loop.cir")


def test_a_sample_reruns_alone_by_name_and_by_seed_bit_for_bit(tmp_path, capsys):
    """`netloop yield --sample nominal#3 --csv` and `netloop check --seed 13 --csv` write the same T, byte for byte,
    and it is the T the results file holds for seed 13."""
    plan = _write(tmp_path, 4)
    main(["yield", plan, "--workers", "1"])
    capsys.readouterr()
    main(["yield", plan, "--sample", "nominal#3", "--csv", str(tmp_path / "a.csv")])
    main(["check", str(tmp_path / "loop.cir"), "--at", "out", "--seed", "13", "--csv", str(tmp_path / "b.csv")])
    out = capsys.readouterr().out
    assert "[nominal#3]" in out
    assert (tmp_path / "a.csv").read_bytes() == (tmp_path / "b.csv").read_bytes()
    record = next(r for r in read_records(tmp_path / "plan.results.jsonl")[0] if r.get("corner") == "nominal#3")
    rows = [line.split(",") for line in (tmp_path / "a.csv").read_text().splitlines()[1:]]
    assert [float(r[1]) for r in rows] == record["loop"]["loop_gain"]["re"]
    assert [float(r[2]) for r in rows] == record["loop"]["loop_gain"]["im"]


def test_killed_run_resumes_without_losing_or_repeating_a_sample(tmp_path, killed_midway):
    """A `netloop yield` process killed after its first samples are written loses nothing: --resume runs only the rest,
    each sample once, and the finished ones keep their records."""
    plan = _write(tmp_path, 8, "[sweep]\npoints_per_decade = 400\n")  # a fine sweep makes each sample slow enough to kill mid-run
    out = tmp_path / "r.jsonl"
    done = killed_midway(["yield", plan, "--workers", "1", "--out", str(out)], out, 2, timeout_s=90)
    assert 2 <= len(done) < 8, "the run was not killed mid-way"
    run = run_samples(load_sample_plan(plan), workers=1, out=out, resume=True)
    assert (run.run.skipped, run.run.ran) == (len(done), 8 - len(done))
    final = [r for r in read_records(out)[0] if r["record"] == "corner"]
    assert sorted(int(r["settings"]["seed"]) for r in final) == list(range(11, 19))
    assert final[: len(done)] == done
    assert run.statistics.deciding.samples == 8
