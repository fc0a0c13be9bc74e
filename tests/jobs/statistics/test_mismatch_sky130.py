"""A sky130 bench with the foundry's mismatch models runs end to end: with mismatch on (section tt_mm, mc_mm_switch=1,
as SkyWater's own sky130.lib.spice sets it) the samples spread; with it off (tt) every seed measures the same loop."""

from __future__ import annotations

from pathlib import Path

import pytest

from netloop.jobs.corners.runner import local_cluster
from netloop.jobs.statistics import load_sample_plan, run_samples

pytestmark = [pytest.mark.ngspice, pytest.mark.slow]

ROOT = Path(__file__).resolve().parents[3]
MILLER = ROOT / "circuits" / "sky130" / "miller_buffer.cir"


def test_mismatch_on_spreads_the_margins_and_mismatch_off_does_not(tmp_path):
    """Three seeds at tt_mm give three different T and a phase-margin spread of a tenth of a degree or more (the
    transistors' agauss terms draw per device); the same seeds at tt give one T bit for bit and a spread of zero;
    every sample passes its self-checks."""
    (tmp_path / "plan.toml").write_text(f'netlist = "{MILLER}"\nat = "out"\n[axes]\nlib = ["tt", "tt_mm"]\n[samples]\ncount = 3\n')
    with local_cluster(2) as cluster:
        run = run_samples(load_sample_plan(tmp_path / "plan.toml"), cluster=cluster.scheduler_address)
    assert [r["outcome"] for r in run.run.records] == ["pass"] * 6
    loops = {c: [r["loop"]["loop_gain"] for r in run.whole_records() if r["corner"].startswith(c + "#")] for c in ("tt", "tt_mm")}
    assert loops["tt"][0] == loops["tt"][1] == loops["tt"][2]
    assert loops["tt_mm"][0]["re"] != loops["tt_mm"][1]["re"] != loops["tt_mm"][2]["re"] != loops["tt_mm"][0]["re"]
    pm = {s.corner: s for s in run.statistics.spreads if s.figure == "pm" and s.corner}
    assert pm["tt"].count == 3 and pm["tt"].std == 0.0 and pm["tt"].min == pm["tt"].max
    assert pm["tt_mm"].count == 3 and pm["tt_mm"].std > 0.1 and pm["tt_mm"].max - pm["tt_mm"].min > 0.1
