"""A sky130 bench with the foundry's mismatch models runs end to end: with mismatch on (section tt_mm, mc_mm_switch=1,
as SkyWater's own sky130.lib.spice sets it) the samples spread; with it off (tt) every seed measures the same loop."""

from __future__ import annotations

from pathlib import Path

import pytest

from netloop.jobs.corners.runner import local_cluster
from netloop.jobs.statistics import load_sample_plan, rerun_sample, run_samples

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


def _operating_point(deck_text: str, folder: Path) -> dict[str, float]:
    """ngspice's own operating point (batch mode, `ngspice -b`) of ``deck_text``'s circuit, every node voltage printed to
    15 digits: the deck's lines up to its .control block or .end, then op."""
    import re
    import subprocess

    body = re.split(r"^\.(?:control|end)\b", deck_text, maxsplit=1, flags=re.MULTILINE | re.IGNORECASE)[0]
    deck = folder / "op.cir"
    deck.write_text(body.rstrip() + "\n.control\nset numdgt=15\nop\nprint all\n.endc\n.end\n")
    run = subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True, timeout=300, cwd=folder)
    found = dict(re.findall(r"^(\w+) = ([-+0-9.e]+)$", run.stdout, flags=re.MULTILINE))
    assert found, run.stdout + run.stderr
    return {node: float(value) for node, value in found.items()}


def test_a_sample_is_the_die_ngspice_draws_for_its_seed_from_the_netlist_as_written(tmp_path):
    """The designer can take a sample to a testbench of their own: ngspice running the netlist as written at its section,
    with `.option seed=N` and nothing of netloop's, finds the operating point that the probe deck of sample N finds (every
    node, printed to 15 digits, equal but for rounding), so both hold the same drawn devices. netloop's deck differs in the probe and in reading only the
    library cards the circuit uses (netloop.sim.used_models), neither of which moves a draw. The next seed's die differs."""
    (tmp_path / "plan.toml").write_text(f'netlist = "{MILLER}"\nat = "out"\n[axes]\nlib = ["tt_mm"]\n[samples]\ncount = 3\nfirst_seed = 5\n')
    plan = load_sample_plan(tmp_path / "plan.toml")
    rerun_sample(plan, "tt_mm#2", keep_decks=tmp_path / "decks")  # seed 6
    first_job = min((tmp_path / "decks").glob("*.cir"), key=lambda p: p.stat().st_mtime_ns)  # the load and operating point
    assert ".option seed=6\n" in first_job.read_text()
    probe_deck = _operating_point(first_job.read_text(), tmp_path)
    written = MILLER.read_text().replace(".lib process.spice tt\n", f".lib {MILLER.parent / 'process.spice'} tt_mm\n")
    assert written != MILLER.read_text()
    designer = {seed: _operating_point(written.replace("\n", f"\n.option seed={seed}\n", 1), tmp_path) for seed in (6, 7)}
    nodes = ("d1", "o1", "tail", "nbias", "out")
    # the same die: equal to the rounding of two different matrices (the probe splits node out), 1e-13 V at most where
    # one seed to the next moves the nodes by tenths of a millivolt or more
    assert {n: designer[6][n] for n in nodes} == {n: pytest.approx(probe_deck[n], rel=0, abs=1e-12) for n in nodes}
    assert all(abs(designer[7][n] - designer[6][n]) > 1e-4 for n in ("d1", "o1", "tail", "nbias"))
