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
