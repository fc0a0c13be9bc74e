"""The numeric axes of a run's settings and the lines of corners along one, the same whatever order the corners finished in."""

from __future__ import annotations

import random

import pytest

from netloop.jobs.runs import lines_along, numeric_axes
from netloop.jobs.runs.axes import planes, setting_number


def _rec(**settings) -> dict:
    return {"corner": "/".join(f"{k}={v}" for k, v in settings.items()), "at": "out", "outcome": "pass", "loop": None,
            "settings": {k.replace("_", "."): v for k, v in settings.items()}}


RUN = tuple(_rec(lib=lib, temp=t, param_iload=i) for lib in ("tt", "ss") for t in ("-40", "27", "125") for i in ("100u", "1m", "10m"))


def test_numeric_settings_become_axes_with_units_and_scale():
    """temp (three values, linear, deg C) and a .param spanning two decades (log, the plan's unit) are axes; the
    process section is not; values are read as SPICE reads them (10m is 0.01)."""
    axes = numeric_axes(RUN, {"iload": "A"})
    assert [(a.key, a.unit, a.log) for a in axes] == [("temp", "°C", False), ("param.iload", "A", True)]
    assert axes[1].values == pytest.approx((1e-4, 1e-3, 1e-2), rel=1e-12)
    assert axes[0].values == (-40.0, 27.0, 125.0)
    # a .param the plan's [units] leaves out has no unit: "" (NumericAxis.unit is text, "" for none), which labels print as nothing
    assert [(a.key, a.unit) for a in numeric_axes(RUN)] == [("temp", "°C"), ("param.iload", "")]


def test_element_settings_carry_the_unit_of_their_element_letter():
    """An element setting's axis is in ohms, farads or henries by its element's letter (SI units), unless the plan's
    [units] names another."""
    run = tuple(_rec(element_rz=r, element_cl=c, element_l1=h) for r, c, h in (("1k", "1p", "1u"), ("2k", "3p", "2u")))
    assert [(a.key, a.unit) for a in numeric_axes(run)] == [("element.rz", "Ω"), ("element.cl", "F"), ("element.l1", "H")]
    assert [a.unit for a in numeric_axes(run, {"cl": "pF"})] == ["Ω", "pF", "H"]


def test_lines_hold_the_corners_equal_in_every_other_setting_in_a_fixed_order():
    """Along iload: one line per (lib, temp), three corners each, ascending; the lines are ordered by their settings
    (numbers by value) whatever order the records came in (a results file is in the order corners finished)."""
    axis = numeric_axes(RUN)[1]
    shuffled = list(RUN)
    random.Random(7).shuffle(shuffled)
    lines = lines_along(tuple(shuffled), axis)
    assert [ln.context for ln in lines] == [f"{lib}/{t}C" for lib in ("ss", "tt") for t in ("-40", "27", "125")]
    assert all([v for v, _ in ln.points] == sorted(v for v, _ in ln.points) and len(ln.points) == 3 for ln in lines)
    assert lines == lines_along(RUN, axis)


def test_planes_over_two_axes_group_by_the_remaining_settings():
    """Over temp and iload there is one plane per process section, each with one line along temp per load."""
    temp, iload = numeric_axes(RUN)
    found = planes(RUN, temp, iload)
    assert [p.context for p in found] == ["ss", "tt"] and [p.at for p in found] == ["out", "out"]
    assert all(len(p.lines) == 3 and all(len(ln.points) == 3 for ln in p.lines) for p in found)


def test_a_setting_with_a_value_that_is_not_a_number_is_no_axis():
    """A .param given as an expression in one corner makes that setting a non-numeric one."""
    run = (_rec(param_cc="1p"), _rec(param_cc="2p"), _rec(param_cc="{2*x}"))
    assert numeric_axes(run) == ()


def test_a_value_that_reads_as_infinite_is_not_a_number():
    """1e999 parses (as Python reads it) to infinity, which no netlist can use as a value: the setting is not a number,
    so a setting with it in one corner is no axis (an axis of [1, inf] would put every crossing at infinity)."""
    assert setting_number("1e999") is None and setting_number("-1e999") is None
    assert setting_number("10m") == pytest.approx(0.01, rel=1e-15)
    run = (_rec(param_cc="1p"), _rec(param_cc="2p"), _rec(param_cc="1e999"))
    assert numeric_axes(run) == ()


def test_lines_order_numbers_by_value_before_text():
    """Lines whose other setting is a number come before one where it is text, and numbers by value (2p before 10p),
    as _order's docstring promises: the line at cc={2*x} (text) is last although 0 would sort before 2p."""
    run = tuple(_rec(param_cc=cc, param_iload=i) for cc in ("{2*x}", "10p", "2p") for i in ("1m", "2m"))
    (iload,) = (a for a in numeric_axes(run) if a.key == "param.iload")
    assert [ln.context for ln in lines_along(run, iload)] == ["cc=2p", "cc=10p", "cc={2*x}"]


def test_a_corner_repeated_at_the_same_axis_value_stays_on_its_line_in_record_order():
    """Two corners at one axis value written two ways (10m and 0.01, as a plan changed between a run and its --resume
    writes them) are one line's two points, in the order of the records (the first counts for boundaries)."""
    run = (_rec(param_iload="1m"), _rec(param_iload="10m"), _rec(param_iload="0.01"))
    (axis,) = numeric_axes(run)
    (line,) = lines_along(run, axis)
    assert [r["corner"] for _, r in line.points] == ["param_iload=1m", "param_iload=10m", "param_iload=0.01"]
    assert [v for v, _ in line.points] == pytest.approx([1e-3, 1e-2, 1e-2], rel=1e-12)


def test_a_planes_other_settings_read_as_a_corner_name_and_a_results_file_by_its_name():
    """A plane's context is its other settings as a corner name writes them (README: "ss/125C"), "" with none; a results
    file goes by its file name in column heads and legends."""
    from netloop.jobs.runs.axes import Plane
    from netloop.jobs.runs.results import ResultsFile

    def plane(*others):
        return Plane(x=None, y=None, at="out", others=others, lines=())

    assert plane(("lib", "ss"), ("temp", "125")).context == "ss/125C" and plane().context == ""
    assert plane(("supply.vdd", "3.0"),).context == "vdd=3.0V"
    assert ResultsFile("runs/night/amp.results.jsonl", "", "", ()).name == "amp.results.jsonl"
