"""The surface a map draws over two numeric axes: exact where the figure is bilinear, PCHIP on each line, NaN in holes."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.interpolate import PchipInterpolator

from netloop.jobs.runs import numeric_axes
from netloop.jobs.runs.axes import planes
from netloop.jobs.runs.boundary import surface

LOADS = ("1m", "3m", "10m", "30m", "100m")  # a log axis: two decades
TEMPS = ("-40", "0", "27", "85", "125")  # a linear axis


def _bilinear_pm(ux: float, uy: float) -> float:
    """A phase margin bilinear in the axis coordinates (log10 of the load, the temperature itself)."""
    return 60.0 + 5.0 * ux - 0.1 * uy + 0.02 * ux * uy


def _bilinear_log_fc(ux: float, uy: float) -> float:
    """log10 of a crossover frequency, bilinear in the axis coordinates (fc is interpolated in log10)."""
    return 5.0 + 0.5 * ux - 0.004 * uy + 0.001 * ux * uy


def _run(pm, fc=lambda ux, uy: 0.0, broken=()):
    """One corner per (load, temperature), its figures given as functions of the axis coordinates; ``broken``: the
    (load, temperature) corners that could not be measured."""
    out = []
    for i in LOADS:
        for t in TEMPS:
            name = f"{i}/{t}C"
            ux, uy = math.log10(float(i.replace("m", "e-3"))), float(t)
            loop = {"margins": {"phase_margin_deg": pm(ux, uy), "unity_gain_hz": 10.0 ** fc(ux, uy)}}
            error = (i, t) in broken
            out.append({"corner": name, "at": "out", "outcome": "error" if error else "pass",
                        "settings": {"param.iload": i, "temp": t}, "loop": None if error else loop})
    return tuple(out)


def _surface(run, metric: str, points: int = 41):
    iload, temp = numeric_axes(run)  # in the order the records name them
    assert (iload.key, iload.log, temp.key, temp.log) == ("param.iload", True, "temp", False)
    (plane,) = planes(run, iload, temp)
    return surface(metric, plane.lines, temp, points)


def test_the_fine_grid_spans_each_axis_evenly_with_the_corners_among_it():
    """x runs from the first to the last load evenly in log10 and y from -40 to 125 evenly, each with the corners'
    own values among its points (so the surface passes through every corner)."""
    xf, yf, z = _surface(_run(_bilinear_pm), "pm", points=41)
    ux = np.log10(xf)
    corners_x = [math.log10(float(i.replace("m", "e-3"))) for i in LOADS]
    for want, have in ((np.linspace(-3.0, -1.0, 41), ux), (corners_x, ux), (np.linspace(-40.0, 125.0, 41), yf),
                       ([float(t) for t in TEMPS], yf)):
        assert all(np.min(np.abs(have - w)) < 1e-12 for w in want)
    assert np.all(np.diff(ux) > 0) and np.all(np.diff(yf) > 0)
    assert z.shape == (yf.size, xf.size)


@pytest.mark.parametrize("metric", ["pm", "fc"])
def test_a_figure_bilinear_in_the_axis_coordinates_is_reproduced_exactly_everywhere(metric):
    """PCHIP reproduces straight-line data exactly (every slope equal, so every derivative is that slope: Fritsch and
    Carlson 1980), so a figure bilinear in (log10 load, temperature) is interpolated to its own value at every point of
    the plane, through a log10 for fc (a figure spanning decades)."""
    run = _run(_bilinear_pm, _bilinear_log_fc)
    xf, yf, z = _surface(run, metric)
    ux, uy = np.meshgrid(np.log10(xf), yf)
    exact = _bilinear_pm(ux, uy) if metric == "pm" else 10.0 ** _bilinear_log_fc(ux, uy)
    assert np.all(np.isfinite(z))
    np.testing.assert_allclose(z, exact, rtol=1e-10, atol=1e-9)


def test_on_each_line_of_corners_the_surface_is_that_lines_pchip():
    """On a measured temperature the surface is scipy's PchipInterpolator through that line's corners (the curve the
    boundaries are read from), so a contour at a threshold passes through the crossings put in words; at a load corner
    it is the PCHIP along temperature through the corners at that load."""
    def curved(ux, uy):
        return 80.0 - 30.0 * ((ux + 3.0) / 2.0) ** 2 + 0.05 * uy + 1e-3 * uy * uy
    xf, yf, z = _surface(_run(curved), "pm")
    ux = np.log10(xf)
    corners_x = np.array([math.log10(float(i.replace("m", "e-3"))) for i in LOADS])
    corners_y = np.array([float(t) for t in TEMPS])
    for y in corners_y:
        row = z[np.argmin(np.abs(yf - y))]
        np.testing.assert_allclose(row, PchipInterpolator(corners_x, curved(corners_x, y))(ux), rtol=0, atol=1e-9)
    for x in corners_x:
        column = z[:, np.argmin(np.abs(ux - x))]
        np.testing.assert_allclose(column, PchipInterpolator(corners_y, curved(x, corners_y))(yf), rtol=0, atol=1e-9)


def test_a_corner_that_was_not_measured_leaves_a_hole_between_its_neighbours():
    """With the corner at 10 mA, 27 C an error, its row is known only up to 3 mA and from 30 mA, and across that gap
    the surface is NaN between the temperatures around it (0 C and 85 C); everywhere else it is the bilinear figure."""
    xf, yf, z = _surface(_run(_bilinear_pm, broken={("10m", "27")}), "pm")
    ux, uy = np.meshgrid(np.log10(xf), yf)
    hole = (ux > math.log10(3e-3) + 1e-12) & (ux < math.log10(30e-3) - 1e-12) & (uy > 0.0) & (uy < 85.0)
    assert hole.any() and np.array_equal(np.isnan(z), hole)
    np.testing.assert_allclose(z[~hole], _bilinear_pm(ux, uy)[~hole], rtol=1e-10, atol=1e-9)
