"""Requirement boundaries interpolated between corners, against the closed-form phase margin of the behavioural LDO."""

from __future__ import annotations

import math

import numpy as np
import pytest
from ldo_model import crossover_rad_s, grid, parts, phase_margin_deg, record, spice, t_of
from scipy.optimize import brentq

from netloop.analysis.requirements import parse_requirement
from netloop.jobs.runs import Crossing, boundaries, lines_along, numeric_axes

PM45 = parse_requirement("pm >= 45")


def _records(iloads, esrs) -> tuple[dict, ...]:
    return tuple(record({"param.iload": spice(i), "param.esr": spice(e)}, lambda f, i=i, e=e: t_of(f, i, e))
                 for i in iloads for e in esrs)


@pytest.fixture(scope="module")
def esr_run():
    """Corners over ESR at six per decade (10 mOhm to 1 Ohm) for five loads: the low-ESR edge of the window."""
    return _records([1e-3, 3e-3, 10e-3, 30e-3, 100e-3], grid(0.01, 1.0))


@pytest.fixture(scope="module")
def load_run():
    """Corners over load current at six per decade (100 uA to 100 mA) for two ESR values."""
    return _records(grid(1e-4, 0.1), [0.02, 0.05])


def test_closed_form_agrees_with_python_control():
    """The closed-form phase margin and crossover of the LDO model equal python-control 0.10's stability_margins on the
    same T(s) (the second reference for every boundary below)."""
    import control

    for iload, esr in ((1e-3, 0.02), (1e-2, 0.3), (1e-1, 0.05), (3e-4, 1.0)):
        k, wz, wp, wa = parts(iload, esr)
        _, pm, _, _, wc, _ = control.stability_margins(control.tf([k / wz, k], np.polymul([1 / wa, 1], [1 / wp, 1])))
        assert phase_margin_deg(iload, esr) == pytest.approx(pm, abs=1e-9)
        assert crossover_rad_s(iload, esr) == pytest.approx(wc, rel=1e-9)


def _check(run, axis_name: str, exact):
    """Every line's crossings agree with the closed-form boundary within 1 % of the axis value, and every sign change
    of the closed form between neighbouring corners has exactly one crossing."""
    axis = next(a for a in numeric_axes(run) if a.name == axis_name)
    found = 0
    for b in boundaries(PM45, lines_along(run, axis)):
        fixed = {k.split(".")[-1]: float(v.replace("m", "e-3")) for k, v in b.line.others}
        values = [v for v, _ in b.line.points]
        margins = [exact(v, fixed) - 45.0 for v in values]
        assert list(b.holds) == [m >= 0 for m in margins]  # reference: the closed form at each corner
        expected = [(lo, hi) for lo, hi, m0, m1 in zip(values, values[1:], margins, margins[1:]) if (m0 >= 0) != (m1 >= 0)]
        assert [(c.low, c.high) for c in b.crossings] == expected
        for c in b.crossings:
            truth = brentq(lambda v: exact(v, fixed) - 45.0, c.low, c.high, xtol=1e-15)
            assert c.value == pytest.approx(truth, rel=0.01), (b.line.context, c)
            assert c.low <= c.value <= c.high
            assert c.holds_above == (exact(c.high, fixed) >= 45.0)
            found += 1
    return found


def test_boundary_along_esr_agrees_with_the_closed_form_within_one_percent(esr_run):
    """Along ESR (six corners a decade) the interpolated ESR where pm >= 45 starts to hold is within 1 % of the
    closed form's, on every load."""
    assert _check(esr_run, "esr", lambda esr, fixed: phase_margin_deg(fixed["iload"], esr)) >= 4


def test_boundary_along_load_current_agrees_with_the_closed_form_within_one_percent(load_run):
    """Along load current (six corners a decade) the interpolated load where pm >= 45 stops holding is within 1 % of the
    closed form's, at both ESR values."""
    assert _check(load_run, "iload", lambda iload, fixed: phase_margin_deg(iload, fixed["esr"])) == 2


def test_a_corner_not_measured_between_two_that_disagree_leaves_the_crossing_uninterpolated(esr_run):
    """When the corner between two disagreeing neighbours is an error, the crossing is reported between the measured
    neighbours with value None and says why, instead of being interpolated across the gap."""
    axis = next(a for a in numeric_axes(esr_run) if a.name == "esr")
    line = next(ln for ln in lines_along(esr_run, axis) if dict(ln.others)["param.iload"] == "10m")
    (crossing,) = boundaries(PM45, (line,))[0].crossings
    below = max(v for v, _ in line.points if v < crossing.value)
    broken = tuple({**r, "outcome": "error", "loop": None} if r is rec else r for r in esr_run
                   for rec in [next(x for v, x in line.points if v == below)])
    line2 = next(ln for ln in lines_along(broken, axis) if dict(ln.others)["param.iload"] == "10m")
    b = boundaries(PM45, (line2,))[0]
    assert b.holds[[v for v, _ in line2.points].index(below)] is None
    (c,) = b.crossings
    assert c.value is None and "not measured" in c.why and c.low < below < c.high


def test_a_requirement_that_holds_everywhere_has_no_crossing(load_run):
    """pm >= 10 holds at every corner of the load sweep (closed form: the lowest is above 20 deg): no crossing, everywhere True."""
    axis = next(a for a in numeric_axes(load_run) if a.name == "iload")
    lowest = min(phase_margin_deg(i, e) for i in grid(1e-4, 0.1) for e in (0.02, 0.05))
    assert lowest > 20.0
    for b in boundaries(parse_requirement("pm >= 10"), lines_along(load_run, axis)):
        assert b.everywhere is True and b.crossings == ()
    from netloop.report.boundaries import METHOD, boundary_text  # noqa: PLC0415

    text = boundary_text(load_run, [parse_requirement("pm >= 10")])
    assert "pm >= 10 holds over the whole line on 2 of 2 line(s)" in text and METHOD not in text  # nothing was interpolated
    assert boundary_text(load_run, [PM45]).endswith(METHOD)  # a boundary interpolated: the method is stated


def test_a_boundary_on_a_linear_axis_is_interpolated_in_the_value_itself():
    """On an axis spanning less than a decade (a supply from 2.7 V to 3.6 V) the figure is interpolated linearly in
    the value: a phase margin that is itself linear in the supply (built so) gives the exact crossing."""
    from netloop.jobs.runs.axes import NumericAxis

    supplies = [2.7, 3.0, 3.3, 3.6]
    run = []
    for v in supplies:
        rec = record({"supply.vdd": f"{v}"}, lambda f: t_of(f, 1e-2, 0.3), corner=f"vdd={v}")
        rec["loop"]["margins"]["phase_margin_deg"] = 30.0 + 20.0 * (v - 2.7)  # linear: 45 deg at 3.45 V
        run.append(rec)
    (axis,) = numeric_axes(tuple(run))
    assert isinstance(axis, NumericAxis) and not axis.log and axis.unit == "V"
    (b,) = boundaries(PM45, lines_along(tuple(run), axis))
    (c,) = b.crossings
    assert c.value == pytest.approx(3.45, abs=1e-9) and c.holds_above
    assert math.isclose(c.low, 3.3) and math.isclose(c.high, 3.6)


def _pm_record(name: str, settings: dict[str, str], pm: float | None) -> dict:
    """A measured corner record whose loop has phase margin ``pm`` (None: the loop has no 0 dB crossover)."""
    outcome = "pass" if pm is not None and pm >= 45 else "fail"
    return {"corner": name, "at": "out", "outcome": outcome, "settings": settings,
            "loop": {"margins": {"phase_margin_deg": pm}}}


@pytest.mark.parametrize(("values", "pms", "expected"), [
    (("3.0", "3.6"), (40.0, 52.0), 3.25),         # linear axis: 3.0 + 0.6 * (45 - 40) / (52 - 40)
    (("1m", "100m"), (60.0, 30.0), 0.01),         # log axis (two decades): halfway in log10, 10 mA
])
def test_a_line_of_two_measured_corners_is_interpolated_on_a_straight_line(values, pms, expected):
    """With two measured corners the crossing is where the straight line through them (in the axis coordinate: the
    value, or its log10 on a log axis) meets the threshold, worked by hand."""
    run = tuple(_pm_record(f"c{k}", {"param.x": s}, pm) for k, (s, pm) in enumerate(zip(values, pms)))
    (axis,) = numeric_axes(run)
    (b,) = boundaries(PM45, lines_along(run, axis))
    (c,) = b.crossings
    assert c.value == pytest.approx(expected, rel=1e-12)
    assert c.holds_above == (pms[1] > pms[0])


@pytest.mark.parametrize(("pms", "low", "high", "holds_above", "without"), [
    ((50.0, None, 40.0), 1.0, 2.0, False, "c1"),  # holds, then no phase margin (fails), then fails
    ((None, 50.0, 60.0), 1.0, 2.0, True, "c0"),   # no phase margin (fails), then holds
])
def test_a_crossing_next_to_a_corner_without_the_figure_is_not_interpolated_and_names_it(pms, low, high, holds_above, without):
    """A corner whose loop has no phase margin fails pm >= 45 (netloop.analysis.requirements) but has no figure to
    interpolate from: the crossing between it and a corner that holds is between their axis values, with no value, and
    names that corner."""
    run = tuple(_pm_record(f"c{k}", {"temp": f"{k + 1}"}, pm) for k, pm in enumerate(pms))
    (axis,) = numeric_axes(run)
    (b,) = boundaries(PM45, lines_along(run, axis))
    assert b.holds == tuple(pm is not None and pm >= 45 for pm in pms)
    assert b.crossings == (Crossing(None, low, high, holds_above, f"the corner at {without} has no phase margin"),)


def test_a_requirement_holds_everywhere_nowhere_or_changes_and_the_unmeasured_points_are_named():
    """Boundary.everywhere: True when every measured corner of the line holds the requirement, False when none does, None
    when it changes along the line or nothing was measured; unmeasured: the axis values whose corner has no figures."""
    from types import SimpleNamespace

    from netloop.jobs.runs.boundary import Boundary

    line = SimpleNamespace(points=((1.0, "a"), (2.0, "b"), (3.0, "c")))

    def boundary(*holds):
        return Boundary(requirement=None, line=line, holds=holds, crossings=())

    assert [boundary(*h).everywhere for h in ((True, None, True), (False, False, None), (True, False, True), (None, None, None))] == [
        True, False, None, None]
    assert boundary(True, None, None).unmeasured == (2.0, 3.0) and boundary(True, False, True).unmeasured == ()
