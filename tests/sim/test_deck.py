"""The deck text netloop hands ngspice: the netlist without its own .end, the job's options, the control steps."""

from __future__ import annotations

import re

import pytest

from netloop.sim import AcRun, AcSweep, SimJob
from netloop.sim.deck import Step, control_steps, raw_name, render_deck, strip_end

DIVIDER = "divider\nv1 in 0 dc 1\nr1 in out 1k\nr2 out 0 1k\n"


@pytest.mark.parametrize(("netlist", "stripped"), [
    ("t\nr1 a 0 1k\n\n.end\n", "t\nr1 a 0 1k"),  # the blank line before .end is trailing once .end goes
    ("t\n\nr1 a 0 1k\n\n  .END  \n\n", "t\n\nr1 a 0 1k"),  # a blank line inside the netlist stays; .end in any case
    ("t\nr1 a 0 1k\n.end\n.end\n", "t\nr1 a 0 1k"),
    ("t\n.endl typ\nr1 a 0 1k", "t\n.endl typ\nr1 a 0 1k"),  # no .end: as written
])
def test_strip_end_drops_the_netlist_s_end_and_the_blanks_before_it(netlist, stripped):
    """strip_end takes off trailing .end lines and the blank lines they leave last, and nothing else (its docstring;
    the netlists and their stripped forms are written by hand)."""
    assert strip_end(netlist) == stripped


def test_a_deck_without_a_workdir_holds_the_netlist_options_and_steps_only():
    """Without a workdir, the deck is the netlist (its .end and the blank before it gone), one .option line a word, the
    control block and one .end, nothing more (written by hand from the template's rules, templates/sim_deck.cir.j2); with
    one, a comment names the folder relative paths are read from."""
    job = SimJob(DIVIDER + "\n.END\n", runs=(), save=())
    deck = render_deck(job, ("reltol=1e-4",), (Step("op", "op"),))
    assert deck == DIVIDER + ".option reltol=1e-4\n.control\nop\n.endc\n.end\n"
    kept = render_deck(SimJob(DIVIDER, runs=(), save=(), workdir="/some/folder"), ())
    assert kept == DIVIDER + "* netloop: relative paths in this deck are read from /some/folder\n.end\n"


def test_each_write_step_names_the_run_and_sweep_whose_raw_file_it_writes():
    """In batch mode's steps, every sweep's 'write' step carries the run and sweep it serves (Step's docstring), the same
    as its 'ac' step, and writes raw_name of those: two runs of two sweeps give four such pairs, in order."""
    sweeps = (AcSweep("dec", 2, 1.0, 100.0), AcSweep("lin", 3, 200.0, 300.0))
    job = SimJob(DIVIDER, runs=(AcRun("a", {"v1": 1.0}, sweeps), AcRun("b", {}, sweeps)), save=("v(out)",), excitable=("v1",))
    steps = control_steps(job, write_raw=True, raw_dir="/raw")
    analyses = [(s.run_index, s.sweep_index) for s in steps if s.kind == "ac"]
    writes = [s for s in steps if s.kind == "write" and re.search(r"run\d+_sweep\d+", s.command)]
    assert analyses == [(0, 0), (0, 1), (1, 0), (1, 1)]
    assert [(s.run_index, s.sweep_index) for s in writes] == analyses
    assert [s.command for s in writes] == [f"write /raw/{raw_name(r, s)}" for r, s in analyses]
