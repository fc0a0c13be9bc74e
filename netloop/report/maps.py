"""Maps of a corner run over its numeric axes: each figure against one axis, and a figure over the plane of two.

Against one axis (``lines_figure``): four panels (phase margin, gain margin, crossover, peaking), one
line per combination of the other settings. Each corner is a marker at its own axis value and figure;
the curve between markers is the interpolation that places the boundaries (netloop.jobs.runs.boundary),
and each requirement is a dashed level with its crossings marked.

Over two axes (``map_figure``): the figure as filled colour, interpolated the same way; the requirement's
boundary as a thick line with the side that fails it hatched; each corner as a dot (holds) or a cross
(fails) at its axis values, an error or inconclusive corner as a grey square.

The artists that carry corners have ``gid`` "corners" (markers) so that their data can be read back.
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from netloop.analysis.requirements import Requirement
from netloop.jobs.runs.axes import Line, NumericAxis, Plane, lines_along, numeric_axes, planes
from netloop.jobs.runs.boundary import boundaries, line_curve, surface
from netloop.jobs.runs.figures import FIGURES, MAP_FIGURES, figure_value, measured
from netloop.report.boundaries import axis_value
from netloop.report.figure import COLOURS, new_figure, render, save
from netloop.report.files import output_file

__all__ = ["MAP_FORMATS", "figure_label", "lines_figure", "map_figure", "map_figures", "refuse_maps_folder", "write_maps"]

MAP_FORMATS = ("png", "svg")
"""Each map is written in both."""

_MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*")
_UNMEASURED = "#9e9e9e"
_BOUNDARY = "#111111"


def figure_label(metric: str) -> str:
    """An axis label for a figure: "phase margin (deg)"."""
    f = FIGURES[metric]
    return f"{f.name} ({f.unit})" if f.unit else f.name


def _axis_label(axis: NumericAxis) -> str:
    return f"{axis.name} ({axis.unit})" if axis.unit else axis.name


def _tick_labels(which, axis: NumericAxis) -> None:
    """Engineering notation with the axis's unit, the ticks at the corners' own values (up to 12 of them; more: the
    usual ticks, and on a log axis only the decades labelled)."""
    from matplotlib.ticker import EngFormatter, FixedLocator, NullFormatter  # noqa: PLC0415

    if len(axis.values) <= 12:
        which.set_major_locator(FixedLocator(list(axis.values)))
        if len(axis.values) > 5 and which.axis_name == "x":
            which.set_tick_params(labelrotation=35)
    which.set_major_formatter(EngFormatter(unit=axis.unit, sep=" "))
    which.set_minor_formatter(NullFormatter())


def _style_x(ax, axis: NumericAxis) -> None:
    if axis.log:
        ax.set_xscale("log")
    _tick_labels(ax.xaxis, axis)
    ax.set_xlabel(_axis_label(axis))
    ax.grid(True, which="major", color="#d0d0d0", lw=0.7)
    ax.grid(True, which="minor", axis="x", color="#ececec", lw=0.5)
    ax.tick_params(which="both", labelsize=8)


def _curve_points(line: Line, metric: str) -> tuple[np.ndarray, np.ndarray]:
    """The interpolated figure along the line between its measured corners (NaN across gaps), for drawing."""
    axis = line.axis
    xs: list[float] = []
    ys: list[float] = []
    pts = [(v, figure_value(r, metric)) for v, r in line.points if measured(r)]
    run: list[tuple[float, float]] = []

    def flush() -> None:
        if len(run) >= 2:
            us = [axis.coordinate(v) for v, _ in run]
            vals = [math.log10(y) if FIGURES[metric].log else y for _, y in run]
            fine = np.linspace(us[0], us[-1], 24 * (len(run) - 1) + 1)
            curve = np.asarray(line_curve(axis, us, vals)(fine), dtype=float)
            xs.extend(axis.value_at(u) for u in fine)
            ys.extend(10.0**curve if FIGURES[metric].log else curve)
            xs.append(math.nan)
            ys.append(math.nan)
        run.clear()

    last = None
    for v, y in pts:
        usable = y is not None and math.isfinite(y) and (not FIGURES[metric].log or y > 0)
        if not usable:
            flush()
        elif v != last:
            run.append((v, y))
        last = v
    flush()
    return np.asarray(xs, dtype=float), np.asarray(ys, dtype=float)


def _line_name(line: Line, several_nodes: bool) -> str:
    name = line.context or "all corners"
    return f"{name} at {line.at}" if several_nodes and line.at else name


def _missing(metric: str) -> str:
    """Why a panel is empty."""
    if metric in ("gm", "lgm"):
        return f"no corner has a {FIGURES[metric].name}:\nno phase crossover of that kind in any sweep"
    if metric in ("pm", "fc"):
        return f"no corner has a {FIGURES[metric].name}:\n|T| crosses 0 dB in no sweep"
    return f"no corner has a {FIGURES[metric].name}"


def _style(index: int, count: int) -> tuple[str, str]:
    """(colour, marker) of the index-th of ``count`` lines: the plot colours for a few, a sequential scale for many
    (lines are ordered by their other settings, so neighbours in colour are neighbours in value)."""
    if count <= len(COLOURS):
        return COLOURS[index], _MARKERS[0]
    from matplotlib import colormaps  # noqa: PLC0415
    from matplotlib.colors import to_hex  # noqa: PLC0415

    return to_hex(colormaps["viridis"](0.92 * index / max(count - 1, 1))), _MARKERS[index % 3]


def lines_figure(records: tuple[dict, ...], axis: NumericAxis, requirements: Sequence[Requirement] = (), *, title: str = ""):
    """Phase margin, gain margin, crossover and peaking against ``axis`` (a matplotlib Figure): one line per
    combination of the other settings, each corner a marker at its axis value; requirements as dashed levels."""
    lines = lines_along(records, axis)
    several = len({ln.at for ln in lines if ln.at}) > 1
    fig = new_figure(11.0, 7.6)
    panels = fig.subplots(2, 2, sharex=True)
    for ax, metric in zip(panels.flat, MAP_FIGURES, strict=True):
        unbounded = missing = 0
        for i, line in enumerate(lines):
            colour, marker = _style(i, len(lines))
            xs, ys = _curve_points(line, metric)
            if xs.size:
                ax.plot(xs, ys, color=colour, lw=1.3, alpha=0.85, zorder=2)
            points = [(v, figure_value(r, metric)) for v, r in line.points if measured(r)]
            shown = [(v, y) for v, y in points if y is not None and math.isfinite(y)]
            unbounded += sum(1 for _, y in points if y is not None and math.isinf(y))
            missing += sum(1 for _, y in points if y is None)
            ax.plot([v for v, _ in shown], [y for _, y in shown], ls="none", marker=marker, ms=4.5, color=colour,
                    label=_line_name(line, several), gid="corners", zorder=4)
        for req in requirements:
            if req.metric != metric:
                continue
            ax.axhline(req.threshold, color=_BOUNDARY, lw=1.0, ls="--", zorder=3, label=f"requirement {req.text}")
            xs = [c.value for b in boundaries(req, lines) for c in b.crossings if c.value is not None]
            if xs:
                ax.plot(xs, [req.threshold] * len(xs), ls="none", marker="D", ms=5, mfc="white", mec=_BOUNDARY, zorder=5,
                        label="boundary (interpolated)")
        if FIGURES[metric].log:
            ax.set_yscale("log")
        if metric == "fc":
            from matplotlib.ticker import EngFormatter  # noqa: PLC0415

            ax.yaxis.set_major_formatter(EngFormatter(unit="Hz", sep=" "))
        ax.set_ylabel(figure_label(metric), fontsize=9)
        _style_x(ax, axis)
        if not any(len(a.get_xdata()) for a in ax.get_lines() if a.get_gid() == "corners"):
            ax.set_yticks([])
            ax.text(0.5, 0.5, _missing(metric), transform=ax.transAxes, fontsize=9, color="#555555", ha="center", va="center")
        elif unbounded or missing:
            ax.text(0.02, 0.04, f"not drawn: {missing + unbounded} corner(s) without a finite {FIGURES[metric].name}",
                    transform=ax.transAxes, fontsize=7.5, color="#555555")
        ax.set_title(FIGURES[metric].name, fontsize=10)
    for ax in panels[0]:
        ax.set_xlabel("")
    handles, labels = panels.flat[0].get_legend_handles_labels()
    for ax in panels.flat[1:]:
        for h, lab in zip(*ax.get_legend_handles_labels(), strict=True):
            if lab not in labels:
                handles.append(h)
                labels.append(lab)
    fig.legend(handles, labels, fontsize=8, loc="outside right upper", title="other settings", title_fontsize=8)
    fig.suptitle(title or f"margins against {axis.name}: one line per combination of the other settings", fontsize=11)
    return fig


def map_figure(plane: Plane, metric: str, requirements: Sequence[Requirement] = (), *, title: str = ""):
    """``metric`` over the plane of two axes (a matplotlib Figure), with the boundary of each requirement on it."""
    from matplotlib.colors import Normalize  # noqa: PLC0415
    from matplotlib.ticker import EngFormatter  # noqa: PLC0415

    x, y = plane.x, plane.y
    xf, yf, z = surface(metric, plane.lines, y)
    fig = new_figure(8.4, 6.4)
    ax = fig.subplots()
    finite = z[np.isfinite(z)]
    if finite.size:
        norm = Normalize(float(finite.min()), float(finite.max()) if finite.max() > finite.min() else float(finite.min()) + 1.0)
        mesh = ax.pcolormesh(xf, yf, np.ma.masked_invalid(z), shading="nearest", cmap="viridis", norm=norm, zorder=1, rasterized=True)
        bar = fig.colorbar(mesh, ax=ax)
        bar.set_label(figure_label(metric))
        if metric == "fc":
            bar.ax.yaxis.set_major_formatter(EngFormatter(unit="Hz", sep=" "))
    drawn = []
    for req in requirements:
        if req.metric != metric or not finite.size or not (finite.min() < req.threshold < finite.max()):
            continue
        zz = np.ma.masked_invalid(z)
        fails = (-np.inf, req.threshold) if req.op in (">=", ">") else (req.threshold, np.inf)
        ax.contourf(xf, yf, zz, levels=list(fails), colors="none", hatches=["///"], zorder=2)
        ax.contour(xf, yf, zz, levels=[req.threshold], colors=_BOUNDARY, linewidths=2.2, zorder=3)
        drawn.append(req)
        points = _plane_crossings(plane, req)
        if points:
            ax.plot([p[0] for p in points], [p[1] for p in points], ls="none", marker="D", ms=5, mfc="white", mec=_BOUNDARY,
                    zorder=5, clip_on=False)
    marks = _corner_marks(ax, plane, metric, requirements)
    if x.log:
        ax.set_xscale("log")
    if y.log:
        ax.set_yscale("log")
    ax.set_xlim(x.values[0], x.values[-1])
    ax.set_ylim(y.values[0], y.values[-1])
    _tick_labels(ax.xaxis, x)
    _tick_labels(ax.yaxis, y)
    ax.set_xlabel(_axis_label(x))
    ax.set_ylabel(_axis_label(y))
    ax.tick_params(which="both", labelsize=8)
    _key(ax, drawn, marks)
    where = f" at {plane.context}" if plane.context else ""
    where += f" (break node {plane.at})" if plane.at else ""
    title = title or f"{FIGURES[metric].name} over {x.name} and {y.name}{where}"
    for req in requirements:
        if req.metric == metric and req not in drawn:
            outcomes = {o for b in boundaries(req, plane.lines) for o in b.holds if o is not None}
            if len(outcomes) == 1:
                title += f"\n{req.text} {'holds at every corner' if outcomes.pop() else 'fails at every corner'} of this map"
    fig.suptitle(title, fontsize=11)
    return fig


def _plane_crossings(plane: Plane, req: Requirement) -> list[tuple[float, float]]:
    """The crossings of a requirement along both axes of a plane, as (x, y) points (the ones put in words)."""
    from netloop.jobs.runs.axes import setting_number  # noqa: PLC0415

    points = [(c.value, setting_number(dict(b.line.others)[plane.y.key]))
              for b in boundaries(req, plane.lines) for c in b.crossings if c.value is not None]
    columns = [line for line in lines_along(tuple(r for ln in plane.lines for _, r in ln.points), plane.y)]
    points += [(setting_number(dict(b.line.others)[plane.x.key]), c.value)
               for b in boundaries(req, tuple(columns)) for c in b.crossings if c.value is not None]
    return points


def _corner_marks(ax, plane: Plane, metric: str, requirements: Sequence[Requirement]) -> tuple[int, int, int]:
    """Each corner at its axis values: a dot where it holds every requirement on this figure, a cross where it fails one."""
    from netloop.jobs.runs.axes import setting_number  # noqa: PLC0415

    mine = [r for r in requirements if r.metric == metric]
    held, failed, unmeasured = [], [], []
    for line in plane.lines:
        yv = setting_number(dict(line.others)[plane.y.key])
        for (xv, record), *outcomes in zip(line.points, *(b.holds for b in boundaries_for(mine, line)), strict=True):
            if not measured(record):
                unmeasured.append((xv, yv))
            elif all(o is not False for o in outcomes):
                held.append((xv, yv))
            else:
                failed.append((xv, yv))
    for pts, style in ((held, {"marker": "o", "mfc": "white", "mec": "black", "ms": 5}),
                       (failed, {"marker": "x", "color": "#b71c1c", "mew": 1.8, "ms": 6}),
                       (unmeasured, {"marker": "s", "mfc": _UNMEASURED, "mec": "#555555", "ms": 5})):
        if pts:  # an empty unclipped line would count as an artist at the figure's origin in the layout
            ax.plot([p[0] for p in pts], [p[1] for p in pts], ls="none", gid="corners", zorder=6, clip_on=False, **style)
    return len(held), len(failed), len(unmeasured)


def boundaries_for(requirements: Sequence[Requirement], line: Line):
    """The boundary of each requirement along one line (netloop.jobs.runs.boundary.boundaries, line by line)."""
    return [boundaries(req, (line,))[0] for req in requirements]


def _key(ax, drawn: Sequence[Requirement], marks: tuple[int, int, int]) -> None:
    """The legend below the map: the corner marks present, then each drawn boundary and its failing side."""
    from matplotlib.lines import Line2D  # noqa: PLC0415
    from matplotlib.patches import Patch  # noqa: PLC0415

    held, failed, unmeasured = marks
    dot = {"ls": "none", "marker": "o", "mfc": "white", "mec": "black"}
    handles = [Line2D([], [], **dot, label="corner: requirement holds" if drawn else "corner")] if held else []
    if failed:
        handles.append(Line2D([], [], ls="none", marker="x", color="#b71c1c", mew=1.8, label="corner: requirement fails"))
    if unmeasured:
        handles.append(Line2D([], [], ls="none", marker="s", mfc=_UNMEASURED, mec="#555555", label="corner: error or inconclusive (no figures)"))
    for req in drawn:
        handles.append(Line2D([], [], color=_BOUNDARY, lw=2.2, label=f"boundary of {req.text}"))
        handles.append(Patch(facecolor="none", edgecolor="#444444", hatch="///", label=f"fails {req.text}"))
    if drawn:
        handles.append(Line2D([], [], ls="none", marker="D", mfc="white", mec=_BOUNDARY, label="boundary between corners (interpolated)"))
    ax.figure.legend(handles=handles, fontsize=7.5, loc="outside lower center", ncols=3, framealpha=0.9)


def _slug(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9.+-]+", "_", text).strip("_") or "all"


def map_figures(records: tuple[dict, ...], requirements: Sequence[Requirement] = (), units: dict[str, str] | None = None):
    """Every map of a run as (file stem, alt text, Figure): margins against each numeric axis, then for each pair
    of numeric axes and each combination of the other settings, the map of every figure a requirement names
    (the phase margin when none does)."""
    axes = numeric_axes(records, units)
    out = []
    for axis in axes:
        out.append((f"margins-vs-{_slug(axis.name)}", f"margins against {axis.name}", lines_figure(records, axis, requirements)))
    metrics = list(dict.fromkeys(r.metric for r in requirements if r.metric in FIGURES)) or ["pm"]
    for i, x in enumerate(axes):
        for y in axes[i + 1:]:
            for plane in planes(records, x, y):
                if len(plane.lines) < 2:
                    continue
                for metric in metrics:
                    stem = f"{metric}-over-{_slug(x.name)}-{_slug(y.name)}"
                    if plane.context or plane.at:
                        stem += "-" + _slug("-".join(p for p in (plane.context, plane.at) if p))
                    out.append((stem, f"{FIGURES[metric].name} over {x.name} and {y.name}", map_figure(plane, metric, requirements)))
    return out


def refuse_maps_folder(folder: str | Path | None) -> None:
    """OutputError now (before any long work) when ``folder`` cannot become a folder of maps; None passes."""
    if folder is None:
        return
    from netloop.errors import OutputError  # noqa: PLC0415

    path = Path(folder)
    existing = next(p for p in (path, *path.parents) if p.exists() or p == Path(p.anchor))
    if not existing.is_dir():
        raise OutputError(f"cannot write the maps to {str(path)!r}: {str(existing)!r} is not a folder")


def write_maps(records: tuple[dict, ...], folder: str | Path, requirements: Sequence[Requirement] = (),
               units: dict[str, str] | None = None) -> tuple[Path, ...]:
    """Write every map (map_figures) as PNG and SVG into ``folder`` (made when missing); returns the paths written."""
    target = Path(folder)
    with output_file(target, "maps folder"):
        target.mkdir(parents=True, exist_ok=True)
    written = []
    for stem, _, fig in map_figures(records, requirements, units):
        for fmt in MAP_FORMATS:
            written.append(save(fig, target / f"{stem}.{fmt}", "map"))
    return tuple(written)


def png_of(fig) -> bytes:
    """A map as PNG bytes (for the HTML page)."""
    return render(fig, "png")
