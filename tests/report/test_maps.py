"""Maps of a corner run: every corner drawn at its own axis values and figure, read back from the figures' data."""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "jobs" / "runs"))
from ldo_model import CDEC, grid, record, spice, t_of  # noqa: E402

from netloop.analysis.requirements import parse_requirements  # noqa: E402
from netloop.jobs.runs import boundaries, figure_value, lines_along, numeric_axes  # noqa: E402
from netloop.jobs.runs.axes import planes, setting_number  # noqa: E402
from netloop.report.maps import lines_figure, map_figure, write_maps  # noqa: E402

REQS = parse_requirements(["pm >= 45"])
UNITS = {"iload": "A", "esr": "Ω"}


@pytest.fixture(scope="module")
def run():
    """The ESR window of the LDO (with its decoupling capacitor): 3 loads x 9 ESR values, and one corner that errored."""
    records = [record({"param.iload": spice(i), "param.esr": spice(e)}, lambda f, i=i, e=e: t_of(f, i, e, cdec=CDEC))
               for i in (1e-3, 1e-2, 1e-1) for e in grid(0.01, 10, (1, 3))]
    records[4] = {**records[4], "outcome": "error", "loop": None, "error": "no convergence"}
    return tuple(records)


def _settings(r: dict, axis) -> float:
    return setting_number(r["settings"][axis.key])


def test_margins_against_an_axis_draw_each_corner_at_its_axis_value_and_figure(run):
    """In each panel of the margins-against-ESR figure, the markers of each line are exactly its measured corners:
    x is the corner's ESR setting and y its figure in the record (pm, fc, peak; gm has none here)."""
    esr = next(a for a in numeric_axes(run, UNITS) if a.name == "esr")
    fig = lines_figure(run, esr, REQS)
    lines = lines_along(run, esr)
    for ax, metric in zip(fig.axes[:4], ("pm", "gm", "fc", "peak"), strict=True):
        drawn = [a for a in ax.get_lines() if a.get_gid() == "corners"]
        assert len(drawn) == len(lines)
        for artist, line in zip(drawn, lines, strict=True):
            expected = [(v, figure_value(r, metric)) for v, r in line.points if r["loop"] is not None and figure_value(r, metric) is not None
                        and math.isfinite(figure_value(r, metric))]
            got = list(zip(artist.get_xdata(), artist.get_ydata()))
            assert got == [(pytest.approx(x, rel=1e-12), pytest.approx(y, rel=1e-12)) for x, y in expected]
            assert artist.get_label() == line.context
    assert sum(len(a.get_xdata()) for a in fig.axes[0].get_lines() if a.get_gid() == "corners") == len(run) - 1  # the error is not drawn


def test_the_map_over_two_axes_marks_every_corner_at_its_settings(run):
    """On the phase-margin map over iload and ESR, the corner marks (holds, fails, not measured) together are exactly
    the run's corners at their (iload, esr) settings, each in the group its requirement outcome says."""
    iload, esr = numeric_axes(run, UNITS)
    (plane,) = planes(run, iload, esr)
    fig = map_figure(plane, "pm", REQS)
    marks = [a for a in fig.axes[0].get_lines() if a.get_gid() == "corners"]
    drawn = sorted((float(x), float(y), a.get_marker()) for a in marks for x, y in zip(a.get_xdata(), a.get_ydata()))
    expected = []
    for r in run:
        x, y = _settings(r, iload), _settings(r, esr)
        pm = figure_value(r, "pm")
        marker = "s" if r["loop"] is None else ("o" if pm >= 45 else "x")
        expected.append((x, y, marker))
    assert drawn == sorted(expected)


def test_the_boundary_drawn_on_the_map_passes_through_the_crossings_put_in_words(run):
    """Each interpolated crossing along either axis lies on the drawn boundary (the contour of the same surface)
    within 1 % of the axis value, in log coordinates."""
    iload, esr = numeric_axes(run, UNITS)
    (plane,) = planes(run, iload, esr)
    fig = map_figure(plane, "pm", REQS)
    contour = next(c for c in fig.axes[0].collections if getattr(c, "levels", None) is not None and list(c.levels) == [45.0])
    verts = np.vstack([p.vertices for p in contour.get_paths() if len(p.vertices)])
    logv = np.log10(verts)
    crossings = [(c.value, _settings(b.line.points[0][1], esr)) for b in boundaries(REQS[0], plane.lines) for c in b.crossings if c.value]
    assert crossings
    for x, y in crossings:
        distance = np.min(np.hypot(logv[:, 0] - math.log10(x), logv[:, 1] - math.log10(y)))
        assert distance < math.log10(1.01)


def test_write_maps_writes_png_and_svg_of_every_map(run, tmp_path):
    """Margins against each of the two axes and the phase-margin map, each as PNG and SVG (files that start as such)."""
    paths = write_maps(run, tmp_path / "maps", REQS, UNITS)
    assert sorted(p.name for p in paths) == sorted(f"{stem}.{ext}" for stem in ("margins-vs-iload", "margins-vs-esr", "pm-over-iload-esr-fb")
                                                   for ext in ("png", "svg"))
    for p in paths:
        head = p.read_bytes()[:64]
        assert head.startswith(b"\x89PNG") if p.suffix == ".png" else b"<svg" in p.read_bytes()[:2000] or b"<?xml" in head


def test_each_panel_names_its_figure_with_its_unit_and_the_crossover_reads_in_hertz(run):
    """The four panels against ESR are labelled with their figure and unit, the crossover's ticks read in hertz with an SI
    prefix (engineering notation, common practice), and the map's colour bar carries the same label as the panel (the
    crossover map's bar in hertz too)."""
    esr = next(a for a in numeric_axes(run, UNITS) if a.name == "esr")
    fig = lines_figure(run, esr, REQS)
    # netloop.jobs.runs.figures.FIGURES: each figure's name and unit, as the text report gives them
    assert [ax.get_ylabel() for ax in fig.axes[:4]] == ["phase margin (deg)", "gain margin (dB)", "crossover (Hz)", "peaking (dB)"]
    assert fig.axes[2].yaxis.get_major_formatter()(2.5e6) == "2.5 MHz"
    iload, esr = numeric_axes(run, UNITS)
    (plane,) = planes(run, iload, esr)
    assert map_figure(plane, "pm", REQS).axes[1].get_ylabel() == "phase margin (deg)"
    assert map_figure(plane, "fc", REQS).axes[1].yaxis.get_major_formatter()(2.5e6) == "2.5 MHz"


def test_each_curve_runs_through_its_own_corners(run):
    """In every panel with data, each line's interpolated curve (same colour as its markers) starts and ends at corners
    and passes through each corner at the corner's own ESR value: an interpolant meets the values it interpolates
    (netloop.jobs.runs.boundary); between the curve's own points, read by linear interpolation in log ESR, to 0.1 % (of the figure, or of the curve's span near 0)."""
    esr = next(a for a in numeric_axes(run, UNITS) if a.name == "esr")
    fig = lines_figure(run, esr, REQS)
    for ax in (fig.axes[0], fig.axes[2], fig.axes[3]):
        for markers in (a for a in ax.get_lines() if a.get_gid() == "corners"):
            (curve,) = [a for a in ax.get_lines() if a.get_gid() is None and a.get_label().startswith("_") and a.get_color() == markers.get_color()]
            xs, ys = np.asarray(curve.get_xdata(), dtype=float), np.asarray(curve.get_ydata(), dtype=float)
            corners = dict(zip(markers.get_xdata(), markers.get_ydata(), strict=True))
            ends = [(xs[i], ys[i]) for i in range(len(xs)) if not math.isnan(xs[i]) and (i == 0 or math.isnan(xs[i - 1]) or math.isnan(xs[i + 1]))]
            assert ends and all(y == pytest.approx(corners[min(corners, key=lambda c: abs(c - x))], rel=1e-9) for x, y in ends)
            assert all(x == pytest.approx(min(corners, key=lambda c: abs(c - x)), rel=1e-9) for x, _ in ends)
            finite = ~np.isnan(xs)
            for x, y in corners.items():
                assert np.interp(math.log10(x), np.log10(xs[finite]), ys[finite]) == pytest.approx(y, rel=1e-3, abs=1e-3 * np.ptp(ys[finite])), (ax.get_title(), x)


def test_the_map_key_names_each_mark_it_shows(run):
    """The key below the phase-margin map names the dots as corners where the requirement holds, the crosses as corners
    where it fails, the grey square as the corner without figures, then the boundary, its failing side and the crossings;
    on a map that draws no boundary (the crossover, which no requirement names) a dot is just a corner."""
    iload, esr = numeric_axes(run, UNITS)
    (plane,) = planes(run, iload, esr)
    keys = [[t.get_text() for t in map_figure(plane, metric, REQS).legends[-1].get_texts()] for metric in ("pm", "fc")]
    # the run: corners above and below pm >= 45, and one that errored (test_the_map_over_two_axes_marks_every_corner_at_its_settings)
    assert keys[0] == ["corner: requirement holds", "corner: requirement fails", "corner: error or inconclusive (no figures)",
                       "boundary of pm >= 45", "fails pm >= 45", "boundary between corners (interpolated)"]
    assert keys[1] == ["corner", "corner: error or inconclusive (no figures)"]
