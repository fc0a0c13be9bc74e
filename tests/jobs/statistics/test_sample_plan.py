"""A statistical plan is a corner plan with a [samples] table; what a designer writes wrong is refused at its plan line."""

from __future__ import annotations

from pathlib import Path

import pytest

from netloop.errors import PlanError
from netloop.jobs.corners import parse_plan
from netloop.jobs.statistics import load_sample_plan, parse_fraction, parse_sample_plan, sample_tasks

HEAD = 'netlist = "amp.cir"\nat = "out"\nrequire = ["pm >= 60"]\n'


def test_samples_table_is_read_with_its_defaults():
    """count is required; first_seed defaults to 1, the target to none, the confidence to 95 %; seeds run on from the first."""
    plan = parse_sample_plan(HEAD + "[axes]\ntemp = [-40, 125]\n[samples]\ncount = 3\n")
    assert (plan.count, plan.first_seed, plan.target, plan.confidence) == (3, 1, None, 0.95)
    assert list(plan.seeds) == [1, 2, 3] and len(plan.plan.axes) == 1 and plan.line == 6
    plan = parse_sample_plan(HEAD + '[samples]\ncount = 2\nfirst_seed = 1000\ntarget = "99.9%"\nconfidence = 0.9\n')
    assert (list(plan.seeds), plan.target, plan.confidence) == ([1000, 1001], pytest.approx(0.999), 0.9)


@pytest.mark.parametrize("text,value", [("99%", 0.99), ("99.9 %", 0.999), ("0.95", 0.95), (0.5, 0.5), ("5e-1", 0.5)])
def test_fractions_are_written_as_percentages_or_fractions(text, value):
    """"99%", "99.9 %", 0.95 and 0.5 read as the fractions a designer means."""
    assert parse_fraction(text, "target") == pytest.approx(value)


@pytest.mark.parametrize("text,message", [(99, "ambiguous"), ("99", "ambiguous"), (1, "ambiguous: write \"1%\""), ("1", "ambiguous"),
                                          ("100%", "strictly between"), ("0%", "strictly between"),
                                          ("high", "fraction such as"), (True, "fraction such as")])
def test_fractions_that_mean_nothing_or_two_things_are_refused(text, message):
    """A bare 99 (99 % or 99?), 100 %, 0 % and words are refused with how to write the value."""
    with pytest.raises(ValueError, match=message):
        parse_fraction(text, "target")


@pytest.mark.parametrize("table,line,message", [
    ("[samples]\n", 4, "needs count = N"),
    ("[samples]\ncount = 0\n", 5, "count must be from 1"),
    ("[samples]\ncount = 2.5\n", 5, "count must be a whole number"),
    ("[samples]\ncount = 2\nfirst_seed = 0\n", 6, "first_seed must be from 1"),
    ("[samples]\ncount = 2\nfirst_seed = 2147483647\n", 6, "first_seed must be from 1 to 2147483646"),
    ("[samples]\ncount = 2\ntarget = 99\n", 6, "ambiguous"),
    ("[samples]\ncount = 2\nseeds = [1, 2]\n", 6, "unknown key 'seeds' in \\[samples\\]"),
    ("samples = 3\n", 4, "samples must be a table"),
])
def test_bad_samples_tables_are_refused_at_their_line(table, line, message):
    """Each mistake in [samples] is a PlanError at plan.toml:LINE saying what to write."""
    with pytest.raises(PlanError, match=rf"^plan\.toml:{line}: .*{message}"):
        parse_sample_plan(HEAD + table, "plan.toml")


def test_a_plan_without_samples_belongs_to_corners_and_one_with_them_to_yield():
    """netloop yield refuses a plan without [samples]; netloop corners refuses one with them; each names the other command."""
    with pytest.raises(PlanError, match="needs a \\[samples\\] table .* run it with 'netloop corners'"):
        parse_sample_plan(HEAD, "plan.toml")
    with pytest.raises(PlanError, match="^plan.toml:4: \\[samples\\] makes this a statistical plan: run it with 'netloop yield PLAN'"):
        parse_plan(HEAD + "[samples]\ncount = 3\n", "plan.toml")


def test_bundled_plan_crosses_sixty_seeds_with_three_temperatures_at_the_mismatch_section():
    """circuits/plans/sky130_miller_yield.toml (the README's example) reads: 60 samples, seeds 1 to 60, at tt_mm and three
    temperatures, each sample's netlist with ngspice's seed first and the section word tt_mm; a 95 % target at 90 %
    confidence; 180 tasks (plan written from the issue's own example: samples crossed with temperatures)."""
    root = Path(__file__).resolve().parents[3]
    splan = load_sample_plan(root / "circuits" / "plans" / "sky130_miller_yield.toml")
    assert (splan.count, list(splan.seeds)[::59], splan.target, splan.confidence) == (60, [1, 60], 0.95, 0.9)
    tasks = sample_tasks(splan)
    assert len(tasks) == 180 and len({t.corner.name.rpartition("#")[0] for t in tasks}) == 3
    settings = {s.kind: s.value for s in tasks[-1].corner.settings}
    assert settings["seed"] == "60" and settings["lib"] == "tt_mm" and tasks[-1].corner.name == "tt_mm/125C#60"
