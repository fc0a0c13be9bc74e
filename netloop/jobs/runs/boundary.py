"""Where a requirement stops holding along a line of corners, interpolated between the two corners that bracket it.

Along a line (corners equal in every setting but one numeric axis) each measured corner holds the requirement
or fails it. Between two neighbours that disagree the requirement's figure meets its threshold; where exactly
is read from a monotone piecewise cubic through the line's measured corners (INTERPOLATION). The cubic keeps
each interval's data monotone, so there is exactly one crossing between two bracketing corners and it never
leaves them. A crossing is not interpolated (``value`` None, ``why`` says so) when a corner between the two
was not measured, or one of them has no such figure (a loop that does not cross 0 dB has no phase margin).
The same curves give the 2-D surface a map draws (``surface``), so the boundary drawn on a map passes through
the crossings put in words.
"""

from __future__ import annotations

import math
import operator
from dataclasses import dataclass

import numpy as np

from netloop.analysis.requirements import Requirement
from netloop.jobs.runs.axes import Line, NumericAxis, setting_number
from netloop.jobs.runs.figures import FIGURES, figure_value, measured

__all__ = ["INTERPOLATION", "Boundary", "Crossing", "boundaries", "line_curve", "surface"]

INTERPOLATION = ("monotone piecewise cubic interpolation (PCHIP: Fritsch and Carlson, \"Monotone Piecewise Cubic "
                 "Interpolation\", SIAM J. Numer. Anal. 17(2), 1980; scipy.interpolate.PchipInterpolator) through the "
                 "measured corners of each line, against log10 of the axis value on a log axis (and of the crossover "
                 "frequency); a straight line where a line has two measured corners")
"""How boundaries (and map surfaces) are interpolated between corners, in words for reports."""

_OPS = {">=": operator.ge, "<=": operator.le, ">": operator.gt, "<": operator.lt}


@dataclass(frozen=True, slots=True)
class Crossing:
    """Where a requirement changes between two neighbouring corners of a line."""

    value: float | None  # the axis value where the figure meets the threshold; None when not interpolated
    low: float  # the axis values of the two corners that bracket it
    high: float
    holds_above: bool  # the requirement holds on the high side
    why: str = ""  # why it was not interpolated


@dataclass(frozen=True, slots=True)
class Boundary:
    """A requirement along one line: which corners hold it and where it changes."""

    requirement: Requirement
    line: Line
    holds: tuple[bool | None, ...]  # per point of the line: True, False, or None (error or inconclusive: no figures)
    crossings: tuple[Crossing, ...]

    @property
    def everywhere(self) -> bool | None:
        """True: every measured corner holds it; False: none does; None: it changes along the line (or none measured)."""
        known = {h for h in self.holds if h is not None}
        return known.pop() if len(known) == 1 else None

    @property
    def unmeasured(self) -> tuple[float, ...]:
        """The axis values of the line's corners that have no figures (error or inconclusive)."""
        return tuple(v for (v, _), h in zip(self.line.points, self.holds) if h is None)


def _coordinate(metric: str, value: float) -> float:
    return math.log10(value) if FIGURES[metric].log and value > 0 else value


def _usable(metric: str, value: float | None) -> bool:
    return value is not None and math.isfinite(value) and (not FIGURES[metric].log or value > 0)


def line_curve(axis: NumericAxis, us: list[float], ys: list[float]):
    """The interpolating curve of INTERPOLATION through (axis coordinate, figure coordinate) points, as a callable."""
    if len(us) == 2:
        (u0, u1), (y0, y1) = us, ys
        return lambda u: y0 + (y1 - y0) * (np.asarray(u, dtype=float) - u0) / (u1 - u0)
    from scipy.interpolate import PchipInterpolator  # noqa: PLC0415 - scipy only when a boundary is asked for

    return PchipInterpolator(np.asarray(us, dtype=float), np.asarray(ys, dtype=float), extrapolate=False)


def _runs(line: Line, metric: str) -> list[list[int]]:
    """Index runs of consecutive points with usable figures (distinct axis values), each a list of point indices."""
    runs: list[list[int]] = []
    current: list[int] = []
    last = None
    for i, (v, r) in enumerate(line.points):
        ok = measured(r) and _usable(metric, figure_value(r, metric))
        if ok and last is not None and v == last:
            continue  # a corner repeated at the same axis value: the first counts
        if ok:
            current.append(i)
            last = v
        else:
            if current:
                runs.append(current)
            current, last = [], None
    if current:
        runs.append(current)
    return runs


def _holds(requirement: Requirement, record: dict) -> bool | None:
    if not measured(record):
        return None
    value = figure_value(record, requirement.metric)
    if value is None or math.isnan(value):
        return False  # a figure the loop does not have fails its requirement (netloop.analysis.requirements)
    return bool(_OPS[requirement.op](value, requirement.threshold))


def _crossing(requirement: Requirement, line: Line, i: int, j: int, holds_above: bool, runs: list[list[int]]) -> Crossing:
    axis, metric = line.axis, requirement.metric
    low, high = line.points[i][0], line.points[j][0]
    if j > i + 1:  # the corners between two known neighbours are the ones without figures
        return Crossing(None, low, high, holds_above, "a corner between them was not measured")
    run = next((run for run in runs if i in run and j in run), None)
    if run is None:
        which = line.points[i] if not _usable(metric, figure_value(line.points[i][1], metric)) else line.points[j]
        return Crossing(None, low, high, holds_above, f"the corner at {which[1]['corner']} has no {FIGURES[metric].name}")
    us = [axis.coordinate(line.points[k][0]) for k in run]
    ys = [_coordinate(metric, figure_value(line.points[k][1], metric)) - _coordinate(metric, requirement.threshold) for k in run]
    curve = line_curve(axis, us, ys)
    from scipy.optimize import brentq  # noqa: PLC0415

    a, b = axis.coordinate(low), axis.coordinate(high)
    root = brentq(lambda u: float(curve(u)), a, b, xtol=1e-12 * max(1.0, abs(a), abs(b)))
    return Crossing(axis.value_at(root), low, high, holds_above)


def boundary_of(requirement: Requirement, line: Line) -> Boundary:
    """The requirement along one line: each corner's outcome and every crossing between neighbours that disagree."""
    holds = tuple(_holds(requirement, r) for _, r in line.points)
    runs = _runs(line, requirement.metric)
    known = [i for i, h in enumerate(holds) if h is not None]
    crossings = []
    for i, j in zip(known, known[1:]):
        if holds[i] != holds[j] and line.points[i][0] != line.points[j][0]:
            crossings.append(_crossing(requirement, line, i, j, bool(holds[j]), runs))
    return Boundary(requirement, line, holds, tuple(crossings))


def boundaries(requirement: Requirement, lines: tuple[Line, ...]) -> tuple[Boundary, ...]:
    """The requirement along each line (netloop.jobs.runs.axes.lines_along), in the lines' order."""
    return tuple(boundary_of(requirement, line) for line in lines)


def _fine(axis: NumericAxis, points: int) -> np.ndarray:
    """Evenly spaced coordinates over the axis, with the corners' own coordinates among them."""
    ends = axis.coordinate(axis.values[0]), axis.coordinate(axis.values[-1])
    return np.unique(np.concatenate([np.linspace(*ends, points), [axis.coordinate(v) for v in axis.values]]))


def surface(metric: str, x_lines: tuple[Line, ...], y_axis: NumericAxis, points: int = 121):
    """The figure over the plane of two axes, for a map: (x_fine, y_fine, Z) with Z[iy, ix] the figure (NaN where it
    cannot be interpolated), built as INTERPOLATION along each line of ``x_lines`` (one per y value, same other
    settings), then along y through those curves at each fine x. On a grid line it equals the line's own curve,
    so a contour of Z at a threshold passes through the crossings ``boundaries`` finds along x."""
    x_axis = x_lines[0].axis
    ux = _fine(x_axis, points)
    rows: list[tuple[float, np.ndarray]] = []
    for line in x_lines:
        y_text = dict(line.others).get(y_axis.key)
        if y_text is None:
            continue
        y = setting_number(y_text)
        row = np.full(ux.shape, np.nan)
        for run in _runs(line, metric):
            if len(run) < 2:
                continue
            us = [x_axis.coordinate(line.points[k][0]) for k in run]
            ys = [_coordinate(metric, figure_value(line.points[k][1], metric)) for k in run]
            inside = (ux >= us[0]) & (ux <= us[-1])
            row[inside] = line_curve(x_axis, us, ys)(ux[inside])
        rows.append((y_axis.coordinate(y), row))
    rows.sort(key=lambda item: item[0])
    uy_known = np.array([u for u, _ in rows])
    uy = _fine(y_axis, points)
    z = np.full((uy.size, ux.size), np.nan)
    table = np.array([row for _, row in rows]) if rows else np.empty((0, ux.size))
    for ix in range(ux.size):
        column = table[:, ix]
        ok = np.isfinite(column)
        # consecutive y values with a value at this x, each stretch interpolated on its own
        stretches, current = [], []
        for k in range(column.size):
            if ok[k]:
                current.append(k)
            elif current:
                stretches.append(current)
                current = []
        if current:
            stretches.append(current)
        for s in stretches:
            if len(s) < 2:
                continue
            inside = (uy >= uy_known[s[0]]) & (uy <= uy_known[s[-1]])
            z[inside, ix] = line_curve(y_axis, list(uy_known[s]), list(column[s]))(uy[inside])
    if FIGURES[metric].log:
        z = 10.0**z
    return np.array([x_axis.value_at(u) for u in ux]), np.array([y_axis.value_at(u) for u in uy]), z
