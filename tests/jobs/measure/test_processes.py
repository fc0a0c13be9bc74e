"""Several ngspice processes sharing a measurement's runs give exactly the measurement of one process."""

from __future__ import annotations

import json

import numpy as np
import pytest

from netloop.cli.main import main
from netloop.jobs.compare import compare
from netloop.jobs.measure import measure
from netloop.jobs.measure_pair import measure_pair

pytestmark = pytest.mark.ngspice


def _same_loop(a, b) -> None:
    np.testing.assert_array_equal(a.analysis.freq_hz, b.analysis.freq_hz)
    np.testing.assert_array_equal(a.analysis.t, b.analysis.t)
    assert a.analysis == b.analysis  # every margin, crossover, verdict and pole


def test_two_processes_equal_one_on_the_transistor_buffer(circuits, tmp_path):
    """The Miller buffer measured with its two excitations in two ngspice processes has one process's samples bit for
    bit, over every refinement round, and the report says two processes ran; the kept decks are whole jobs."""
    one = measure(circuits / "miller_buffer.cir", "out", processes=1, keep_decks=tmp_path / "one")
    two = measure(circuits / "miller_buffer.cir", "out", processes=2, keep_decks=tmp_path / "two")
    _same_loop(one, two)
    assert (one.sim.processes, two.sim.processes) == (1, 2)
    assert two.sim.refinement_rounds >= 1
    decks = {k: sorted(d.read_text() for d in (tmp_path / k).glob("*.cir")) for k in ("one", "two")}
    assert decks["one"] == decks["two"]  # the same whole decks, one per job, not one per share


def test_pair_and_compare_split_their_runs_the_same_way(circuits):
    """A differential pair's four runs and two locations' four runs, shared by two processes, equal one process's."""
    for one, two in (
        (measure_pair(circuits / "fd_amp_cmfb.cir", "outp,outn", processes=1), measure_pair(circuits / "fd_amp_cmfb.cir", "outp,outn", processes=2)),
    ):
        for mode in one.modes:
            _same_loop(one.modes[mode], two.modes[mode])
            assert (one.modes[mode].sim.processes, two.modes[mode].sim.processes) == (1, 2)  # the processes asked for ran
    a = compare(circuits / "miller_buffer.cir", ["out", "o1"], processes=1)
    b = compare(circuits / "miller_buffer.cir", ["out", "o1"], processes=2)
    for x, y in zip(a.results, b.results, strict=True):
        _same_loop(x, y)
        assert (x.sim.processes, y.sim.processes) == (1, 2)


def test_check_jobs_option(circuits, capsys):
    """--jobs 2 gives the JSON of --jobs 1 but for the process count; --jobs 0 is a usage error naming the option."""
    docs = []
    for jobs in ("1", "2"):
        assert main(["check", str(circuits / "cond_stable.cir"), "--at", "out", "--json", "--jobs", jobs]) in (0, 1)
        docs.append(json.loads(capsys.readouterr().out))
    assert [d["simulation"].pop("processes") for d in docs] == [1, 2]
    for d in docs:
        d["simulation"].pop("seconds"), d["simulation"].pop("ngspice_seconds")
    assert docs[0] == docs[1]
    with pytest.raises(SystemExit) as stopped:
        main(["check", str(circuits / "cond_stable.cir"), "--at", "out", "--jobs", "0"])
    assert stopped.value.code == 2
    assert "--jobs: expected 1 or more processes" in capsys.readouterr().err
