"""netloop corners with maps, a report, a baseline and a trend, for real: the demo regulator's two revisions in ngspice."""

from __future__ import annotations

import json
import math
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "jobs" / "runs"))
from ldo_model import AEA, BETA, CDEC, COUT, FA, KP, LAMBDA, R1, R2, W, phase_margin_deg  # noqa: E402

from netloop.analysis.requirements import parse_requirement  # noqa: E402
from netloop.cli.main import main  # noqa: E402
from netloop.jobs.corners.runner import local_cluster  # noqa: E402
from netloop.jobs.runs import boundaries, lines_along, numeric_axes, read_results  # noqa: E402

pytestmark = pytest.mark.ngspice

ROOT = Path(__file__).resolve().parents[2]
PLANS = ROOT / "circuits" / "plans"
FB_POLE_HZ = 1 / (W * (R1 * R2 / (R1 + R2)) * 24e-15)  # revision B's 24 fF at fb, with R1 || R2


@pytest.fixture(scope="module")
def scheduler():
    """A Dask scheduler with two single-threaded workers on 127.0.0.1, shared by this module."""
    with local_cluster(2) as cluster:
        yield cluster.scheduler_address


def _reference_pm(iload: float, esr: float, fb_pole_hz: float | None) -> float:
    """python-control 0.10 stability_margins on the netlist's T(s) as a ratio of polynomials (tests/jobs/runs/ldo_model.py)."""
    import control

    gmp, g = math.sqrt(2 * KP * iload), LAMBDA * iload + 1 / (R1 + R2)
    num = np.array([BETA * AEA * gmp * esr * COUT, BETA * AEA * gmp])
    den = np.polymul([1 / (W * FA), 1], np.polyadd(np.polymul([CDEC, g], [esr * COUT, 1]), [COUT, 0]))
    if fb_pole_hz:
        den = np.polymul(den, [1 / (W * fb_pole_hz), 1])
    return control.stability_margins(control.tf(num, den))[1]


def _value(text: str) -> float:
    return float(text[:-1]) * {"u": 1e-6, "m": 1e-3}[text[-1]] if text[-1] in "um" else float(text)


def test_revision_b_regresses_at_exactly_the_corner_the_closed_form_says(tmp_path, scheduler, capsys):
    """Revision A passes every corner; revision B passes every requirement too but loses more than 2 deg of phase
    margin at exactly the corners python-control says it does (iload=100m/esr=1), so the run fails with exit status 1;
    ngspice's margins match the closed form within 0.05 deg; the JUnit XML, report, maps (counted on stderr) and trend
    carry it."""
    a, b = tmp_path / "a.jsonl", tmp_path / "b.jsonl"
    assert main(["corners", str(PLANS / "ldo_rev_a.toml"), "--cluster", scheduler, "--out", str(a), "--progress"]) == 0
    assert "] 12/12 corners, 0 failed" in capsys.readouterr().err  # --progress draws the bar off a terminal too
    # the same results file again: refused without --resume or --force, replaced with --force (nothing of it lost before)
    before = a.read_text()
    assert main(["corners", str(PLANS / "ldo_rev_a.toml"), "--cluster", scheduler, "--out", str(a)]) == 2
    assert "or --force to replace it" in capsys.readouterr().err and a.read_text() == before
    assert main(["corners", str(PLANS / "ldo_rev_a.toml"), "--cluster", scheduler, "--out", str(a), "--force"]) == 0
    capsys.readouterr()
    assert a.read_text() != before and len([r for r in map(json.loads, a.read_text().splitlines()) if r.get("record") == "corner"]) == 12
    # a record of a corner the plan no longer has, resumed with nothing left to run: said on stderr, the document alone on stdout
    lines = a.read_text().splitlines()
    gone = {**json.loads(lines[-1]), "key": "a corner since removed", "corner": "gone"}
    stale = tmp_path / "stale.jsonl"
    stale.write_text("\n".join([*lines, json.dumps(gone)]) + "\n")
    assert main(["corners", str(PLANS / "ldo_rev_a.toml"), "--cluster", scheduler, "--out", str(stale), "--resume", "--json"]) == 0
    resumed = capsys.readouterr()
    assert json.loads(resumed.out)["verdict"] == "pass"
    assert ("netloop: 1 record(s) in the results file belong to no corner of this plan (the plan changed since they were written) "
            "and were left out") in resumed.err.splitlines()
    junit, report, maps = tmp_path / "b.xml", tmp_path / "b.html", tmp_path / "maps"
    rc = main(["corners", str(PLANS / "ldo_rev_b.toml"), "--cluster", scheduler, "--out", str(b), "--baseline", str(a), "--json",
               "--junit", str(junit), "--report", str(report), "--maps", str(maps)])
    printed = capsys.readouterr()
    doc = json.loads(printed.out)
    assert rc == 1 and doc["verdict"] == "fail" and doc["counts"]["pass"] == 12  # every requirement met, still a failure
    # the maps line of the README's "The stable window of a regulator", on stderr with --json (stdout holds the document)
    assert f"maps: 6 file(s) in {maps}" in printed.err.splitlines()
    for run, pole in ((read_results(a), None), (read_results(b), FB_POLE_HZ)):
        for r in run.records:
            iload, esr = _value(r["settings"]["param.iload"]), _value(r["settings"]["param.esr"])
            assert r["loop"]["margins"]["phase_margin_deg"] == pytest.approx(_reference_pm(iload, esr, pole), abs=0.05)
    drops = {r["corner"]: _reference_pm(_value(r["settings"]["param.iload"]), _value(r["settings"]["param.esr"]), None)
             - _reference_pm(_value(r["settings"]["param.iload"]), _value(r["settings"]["param.esr"]), FB_POLE_HZ)
             for r in read_results(a).records}
    expected = {k for k, d in drops.items() if d > 2.0}
    assert expected == {"iload=100m/esr=1"}
    assert {r["corner"] for r in doc["baseline"]["regressions"]} == expected
    suite = ET.parse(junit).getroot().findall("testsuite")[1]
    assert [c.get("name") for c in suite.findall("testcase") if c.find("failure") is not None] == sorted(expected)
    assert report.stat().st_size > 100_000 and len(list(maps.iterdir())) == 6
    assert main(["trend", str(a), str(b), "--json"]) == 0
    printed = capsys.readouterr().out
    trend = json.loads(printed)
    assert printed.startswith('{\n  "')  # indented for a reader, as every --json document of netloop
    row = next(c for c in trend["corners"] if c["corner"] == "iload=100m/esr=1")
    assert row["phase_margin_deg"][0] - row["phase_margin_deg"][1] == pytest.approx(drops["iload=100m/esr=1"], abs=0.1)


def test_the_boundary_from_an_ngspice_corner_run_agrees_with_the_closed_form(tmp_path, scheduler, capsys):
    """Corners of the regulator without its decoupling (param.cdec 1e-21, a pole beyond 1e19 Hz) at six ESR values a
    decade: the interpolated ESR where pm >= 45 starts to hold is within 1 % of the closed form's at each load."""
    plan = tmp_path / "edge.toml"
    plan.write_text(f'netlist = "{ROOT / "circuits" / "regulator" / "ldo_rev_a.cir"}"\nat = "fb"\nrequire = ["pm >= 45"]\n'
                    '[axes]\nparam.cdec = ["1e-21"]\nparam.iload = ["3m", "10m", "30m"]\nparam.esr = [0.03, 0.05, 0.07, 0.1, 0.15]\n')
    out = tmp_path / "edge.jsonl"
    rc = main(["corners", str(plan), "--cluster", scheduler, "--out", str(out)])
    text = capsys.readouterr().out
    assert rc == 1 and "pm >= 45 holds for esr >= " in text  # the low-ESR corners fail by design
    run = read_results(out)
    esr = next(a for a in numeric_axes(run.records) if a.name == "esr")
    found = 0
    for bnd in boundaries(parse_requirement("pm >= 45"), lines_along(run.records, esr)):
        iload = _value(dict(bnd.line.others)["param.iload"])
        (c,) = bnd.crossings
        from scipy.optimize import brentq

        truth = brentq(lambda e: phase_margin_deg(iload, e) - 45.0, c.low, c.high, xtol=1e-15)
        assert c.value == pytest.approx(truth, rel=0.01)
        found += 1
    assert found == 3
