"""Limits on how much worse than its baseline a figure may get: reading them, and which moves exceed them."""

from __future__ import annotations

import math

import pytest

from netloop.errors import PlanError
from netloop.jobs.corners import parse_plan
from netloop.jobs.runs import parse_limit, parse_limits


def test_limits_read_amounts_in_the_figures_units_or_percent():
    """pm=2deg, gm=1.5dB, fc=10%, fc=1MHz and peak=0.5 read as the amounts an engineer means (netloop.analysis.quantities)."""
    assert parse_limit("pm=2deg").amount == 2.0 and not parse_limit("pm=2deg").percent
    assert parse_limit("gm = 1.5dB").amount == 1.5
    assert parse_limit("fc=10%").percent and parse_limit("fc=10%").amount == 10.0
    assert parse_limit("fc=1MHz").amount == 1e6
    assert parse_limit("PEAK=0.5").metric == "peak"
    assert parse_limit("fc=10%").allowed(-50.0) == 5.0 and parse_limit("pm=2deg").allowed(60.0) == 2.0  # a share of |baseline|


@pytest.mark.parametrize("text", ["pm>2", "pm=", "xx=2", "pm=2V", "pm=-1", "fc=ten%", "pm=nan"])
def test_a_bad_limit_says_what_was_expected(text):
    """A malformed limit is a PlanError naming the form FIGURE=AMOUNT and the figures."""
    with pytest.raises(PlanError, match="expected FIGURE=AMOUNT"):
        parse_limit(text)


def test_a_command_line_limit_replaces_the_plans_on_the_same_figure():
    """--limit pm=1deg replaces the plan's pm limit and keeps its peak limit; figures in FIGURES order."""
    plan = parse_plan('netlist = "x.cir"\nat = "out"\n[regression]\npeak = "1dB"\npm = "2deg"\n')
    assert [lim.text for lim in plan.limits] == ["pm=2deg", "peak=1dB"]
    assert [lim.text for lim in parse_limits(["pm=1deg"], plan.limits)] == ["pm=1deg", "peak=1dB"]


def test_the_plan_names_a_baseline_relative_to_itself(tmp_path):
    """[regression] baseline = "old.jsonl" is read relative to the plan's folder."""
    plan = parse_plan('netlist = "x.cir"\n[regression]\nbaseline = "old.jsonl"\npm = 2\n', str(tmp_path / "p.toml"))
    assert plan.baseline == str((tmp_path / "old.jsonl").resolve()) and plan.limits[0].amount == 2.0


@pytest.mark.parametrize(("text", "before", "now", "exceeded"), [
    ("pm=2deg", 60.0, 58.0, False),       # exactly the allowed fall
    ("pm=2deg", 60.0, 57.9, True),
    ("pm=2deg", 60.0, 70.0, False),       # a rise is never a regression of pm
    ("peak=1dB", 1.0, 2.5, True),         # peaking: higher is worse
    ("peak=1dB", 3.0, 0.0, False),
    ("fc=10%", 1e6, 0.89e6, True),
    ("fc=10%", 1e6, 0.91e6, False),
    ("gm=1dB", math.inf, 30.0, True),     # no phase crossover before, one now
    ("gm=1dB", 30.0, math.inf, False),
    ("gm=1dB", math.inf, math.inf, False),
    ("pm=2deg", 60.0, None, True),        # the figure is gone
    ("pm=2deg", None, 40.0, False),       # it appeared
])
def test_exceeded(text, before, now, exceeded):
    """Which moves exceed a limit: the worse way only, by more than the amount; a figure that disappears does; infinity
    compares as infinitely large (hand-worked cases)."""
    assert parse_limit(text).exceeded(before, now) is exceeded


@pytest.mark.parametrize(("text", "says"), [
    ("pm>2", "it does not have the form FIGURE=AMOUNT"),  # no '=': the form parse_limit's docstring gives
    ("xx=2", "unknown figure 'xx'"),
    ("pm=2V", "the amount of phase margin: '2V': 'V' is not a multiplier or unit for an angle"),
    ("gm=2deg", "the amount of gain margin: '2deg'"),
    ("fc=ten%", "'ten%' is not a percentage"),
    ("pm=-1", "the amount must be a finite number, 0 or more"),
    ("fc=inf%", "the amount must be a finite number, 0 or more"),
])
def test_a_bad_amount_says_what_is_wrong_with_it(text, says):
    """A limit not of the form FIGURE=AMOUNT, or of an unknown figure, says which; an amount in the wrong unit names the
    figure and the unit problem; a percentage that is no number says so (and not the figure's unit, which a percentage
    does not use)."""
    with pytest.raises(PlanError) as info:
        parse_limit(text)
    assert f"cannot read limit {text!r}: {says}" in str(info.value)


@pytest.mark.parametrize(("table", "says"), [
    ('regression = 3\n', 'regression must be a table ([regression]) of limits such as pm = "2deg"'),
    ('[regression]\nbaseline = ""\n', 'regression.baseline must be the path of a results file, e.g. "ldo.baseline.jsonl"'),
    ('[regression]\nbaseline = 5\n', 'regression.baseline must be the path of a results file'),
    ('[regression]\npm = true\n', 'regression.pm must be an amount such as "2deg" or "10%", got True'),
])
def test_a_bad_regression_table_says_where_and_what_it_expected(tmp_path, table, says):
    """A [regression] table that is no table, an empty or non-text baseline, and a limit that is no amount are each a
    PlanError at the plan's file:line (the line of regression) saying what was expected."""
    path = tmp_path / "p.toml"
    with pytest.raises(PlanError) as info:
        parse_plan(f'netlist = "x.cir"\n{table}', str(path))
    assert str(info.value).startswith(f"{path}:2: {says}")
