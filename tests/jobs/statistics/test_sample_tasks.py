"""A statistical plan's samples: every corner once per seed, each sample's netlist starting with ngspice's seed."""

from __future__ import annotations

import numpy as np
import pytest

from netloop.jobs.measure import measure
from netloop.jobs.statistics import (
    parse_sample_plan,
    sample_of,
    sample_tasks,
    seeded_netlist,
)
from netloop.netlist import write_netlist

LOOP = """invented one-pole loop whose gain element is drawn by agauss
Vin in 0 dc 0 ac 1
G1 0 n1 in out {agauss(1e-3, 3e-4, 3)}
R1 n1 0 1e5
C1 n1 0 1n
E3 out 0 n1 0 1
.param k=1
.end
"""


def _plan(tmp_path, body: str):
    (tmp_path / "loop.cir").write_text(LOOP)
    (tmp_path / "plan.toml").write_text(f'netlist = "loop.cir"\nat = "out"\n{body}')
    return parse_sample_plan((tmp_path / "plan.toml").read_text(), str(tmp_path / "plan.toml"))


def test_each_corner_gets_every_seed_and_each_sample_reads_its_seed_first(tmp_path):
    """Two corners x three samples from seed 40: names CORNER#i, seeds 40-42 at each corner (the same die at both),
    distinct keys, and each sample's netlist has .option seed=N as its first statement."""
    plan = _plan(tmp_path, '[axes]\nparam.k = ["1", "2"]\n[samples]\ncount = 3\nfirst_seed = 40\n')
    tasks = sample_tasks(plan)
    assert [t.corner.name for t in tasks] == ["k=1#1", "k=1#2", "k=1#3", "k=2#1", "k=2#2", "k=2#3"]
    assert [t.corner.describe()["seed"] for t in tasks] == ["40", "41", "42"] * 2
    assert len({t.key for t in tasks}) == 6 and all(t.inputs == (str(tmp_path / "loop.cir"),) for t in tasks)
    from netloop.jobs.corners import apply_settings

    for t in tasks:
        text = write_netlist(apply_settings(t.corner.netlist, t.corner.settings)).splitlines()
        assert text[1] == f".option seed={t.corner.describe()['seed']}"  # first after the title line
    assert sample_of({"corner": "k=2#3", "settings": {"seed": "42"}}) == ("k=2", 42)


@pytest.mark.ngspice
def test_the_samples_seed_overrules_a_seed_the_netlist_sets(tmp_path):
    """A netlist with its own .option seed=3 measured with seed 9 gives the T of the netlist without that line with
    seed 9, not that of seed 3: ngspice takes the first seed it reads, and the sample's comes first."""
    plain = tmp_path / "plain.cir"
    plain.write_text(LOOP)
    own = tmp_path / "own.cir"
    own.write_text(LOOP.replace(".param k=1", ".param k=1\n.option seed=3"))
    t_own = measure(seeded_netlist(str(own), 9), "out").analysis.t
    t_plain = measure(seeded_netlist(str(plain), 9), "out").analysis.t
    t_three = measure(seeded_netlist(str(plain), 3), "out").analysis.t
    assert np.array_equal(t_own, t_plain)
    assert not np.array_equal(t_own[:5], t_three[:5])


def test_workers_take_the_netlists_the_plan_check_read_for_the_samples(tmp_path, monkeypatch):
    """checked_samples gives the netlists the plan's check read, one per corner, keyed as workers keep them: a worker
    given them reads no netlist for any sample (parse_file counted) and builds each sample's netlist, seed line
    included, exactly as its own read does (the reference)."""
    from netloop.jobs.corners import worker
    from netloop.jobs.statistics.samples import checked_samples
    from netloop.netlist import parse_file

    plan = _plan(tmp_path, '[axes]\nparam.k = ["1", "2"]\n[samples]\ncount = 2\n')
    tasks, netlists = checked_samples(plan)
    assert set(netlists) == {worker.read_key(t.corner) for t in tasks}
    reads = []
    monkeypatch.setattr(worker, "parse_file", lambda p: reads.append(p) or parse_file(p))
    monkeypatch.setattr(worker, "_READ", {})
    own = [write_netlist(worker.corner_netlist(t.corner)) for t in tasks]
    assert len(reads) == 1 and all(text.splitlines()[1].startswith(".option seed=") for text in own)
    worker._READ.clear()
    worker.use_netlists(netlists)
    try:
        assert [write_netlist(worker.corner_netlist(t.corner)) for t in tasks] == own and len(reads) == 1
    finally:
        worker.use_netlists(None)


def test_a_sample_is_named_by_its_corner_up_to_the_last_separator():
    """A record's corner is its sample's name without the sample number, cut at the last '#', so that a corner whose own
    name holds one (an axis value written 'tt#2') keeps it; the seed is the one its settings hold."""
    assert sample_of({"corner": "tt#2#17", "settings": {"seed": 27}}) == ("tt#2", 27)
    assert sample_of({"corner": "nominal", "settings": {}}) == ("nominal", None)


@pytest.mark.ngspice
def test_a_run_takes_the_workers_it_is_given(tmp_path):
    """run_samples(workers=1) measures on one local worker, whatever the machine's CPUs (`netloop yield --workers 1`)."""
    from netloop.jobs.statistics import run_samples

    splan = _plan(tmp_path, "[samples]\ncount = 4\n")
    run = run_samples(splan, workers=1, out=tmp_path / "r.jsonl")
    assert run.run.workers == 1 and run.run.ran == 4
