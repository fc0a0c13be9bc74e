"""The pictures of a statistical run: a histogram of each margin with its requirement line, and the phase margin
against the crossover frequency, each sample coloured by its verdict.

Histograms count the samples with a verdict (a sample whose self-check failed has doubtful figures); with
several corners the bars of each corner are stacked in their own colour. A requirement on a figure is a
dashed line at its threshold, with the failing side shaded. In the scatter, green samples pass, red ones
fail (a requirement or stability), grey ones have no verdict; each corner has its own marker.
"""

from __future__ import annotations

import math
from pathlib import Path

from netloop.jobs.statistics import FIGURES, SampleRun, YieldStatistics
from netloop.report.figure import COLOURS, new_figure, save
from netloop.report.files import tagged_path
from netloop.report.notation import prefix_for
from netloop.report.yield_text import figure_text

__all__ = ["FAILS", "NO_VERDICT", "PASSES", "histogram_figure", "plot_yield", "scatter_figure", "scatter_path"]

PASSES = "#2e7d32"
FAILS = "#c62828"
NO_VERDICT = "#8a8a8a"
REQUIREMENT = "#b71c1c"
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "<", ">", "h")
_BINS = 24


def _thresholds(run: SampleRun, figure: str) -> list[tuple[float, str, str]]:
    """(threshold, op, text) of each requirement of the plan on ``figure``."""
    return [(r.threshold, r.op, r.text) for r in run.plan.plan.requirements if r.metric == figure]


def _values(stats: YieldStatistics, figure: str, corner: str) -> list[float]:
    return [s.figures[figure] for s in stats.samples
            if s.conclusive and s.corner == corner and s.figures.get(figure) is not None and math.isfinite(s.figures[figure])]


def _frequency_axis(axis, values: list[float]) -> str:
    """Tick labels of a frequency axis as plain numbers in one unit chosen from the largest value ("MHz"), which is
    returned for the axis label: tick labels that each carry a unit run into each other on a narrow panel."""
    from matplotlib.ticker import MaxNLocator  # noqa: PLC0415 - lazy, as every plot module

    scale, prefix = prefix_for(max((abs(v) for v in values if v), default=1.0))
    axis.set_major_formatter(lambda v, _pos: f"{v / scale:g}")
    axis.set_major_locator(MaxNLocator(nbins=6))
    return f"{prefix}Hz"


def _requirement_label(ax, threshold: float, op: str, text: str) -> None:
    """The requirement's text beside its line, on the passing side, in a white box so bars behind it stay readable."""
    ax.text(threshold, 0.98, f" {text} ", transform=ax.get_xaxis_transform(), ha="left" if op in (">=", ">") else "right",
            va="top", fontsize=8, color=REQUIREMENT, zorder=5,
            bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.8, "pad": 1.0})


def histogram_figure(run: SampleRun):
    """One histogram per figure (phase margin, gain margin, crossover frequency, peaking), requirement lines drawn."""
    from matplotlib.patches import Patch  # noqa: PLC0415 - lazy, as every plot module
    from matplotlib.ticker import MaxNLocator  # noqa: PLC0415

    stats = run.statistics
    fig = new_figure(10.0, 7.0)
    axes = fig.subplots(2, 2).flatten()
    for ax, figure in zip(axes, FIGURES, strict=True):
        name, unit, _ = FIGURES[figure]
        series = [(c, _values(stats, figure, c)) for c in stats.corners]
        every = [v for _, vs in series for v in vs]
        lines = _thresholds(run, figure)
        ax.set_title(name, fontsize=10)
        ax.set_xlabel(unit, fontsize=9)
        ax.set_ylabel("samples", fontsize=9)
        if not every:
            missing = sum(1 for s in stats.samples if s.conclusive and s.figures.get(figure) is None)
            why = " (no phase crossover: unlimited)" if figure == "gm" and missing else ""
            ax.text(0.5, 0.5, f"no sample has a {name}{why}", transform=ax.transAxes, ha="center", va="center", fontsize=9, color="#555555")
            ax.set_yticks([])
            ax.set_xticks([])
            continue
        low, high = min(every + [t for t, _, _ in lines]), max(every + [t for t, _, _ in lines])
        pad = (high - low) * 0.05 or abs(high) * 0.01 or 1.0
        bins = [low - pad + i * (high - low + 2 * pad) / _BINS for i in range(_BINS + 1)]
        colours = [COLOURS[i % len(COLOURS)] for i in range(len(series))]
        ax.hist([vs for _, vs in series], bins=bins, stacked=True, color=colours, edgecolor="white", linewidth=0.4)
        for threshold, op, text in lines:
            ax.axvline(threshold, color=REQUIREMENT, linestyle="--", linewidth=1.4)
            if op in (">=", ">"):
                ax.axvspan(bins[0], threshold, color=REQUIREMENT, alpha=0.07, linewidth=0)
            else:
                ax.axvspan(threshold, bins[-1], color=REQUIREMENT, alpha=0.07, linewidth=0)
            _requirement_label(ax, threshold, op, text)
        ax.set_xlim(bins[0], bins[-1])
        if len(series) > 1:  # one mean over several corners' distributions says little: the spread table has each
            ax.set_title(f"{name}: {len(every)} samples at {len(series)} corners", fontsize=10)
        else:
            ax.set_title(f"{name}: {len(every)} samples, mean {figure_text(figure, sum(every) / len(every))}", fontsize=10)
        if unit == "Hz":
            ax.set_xlabel(_frequency_axis(ax.xaxis, every), fontsize=9)
        ax.yaxis.set_major_locator(MaxNLocator(integer=True))  # counts of samples: no "1.75 samples"
        ax.tick_params(labelsize=8)
        ax.grid(axis="y", color="#e3e3e3", linewidth=0.6)
        ax.set_axisbelow(True)
    if len(stats.corners) > 1:  # one legend for the four panels, below them, where no bar can hide behind it
        handles = [Patch(facecolor=COLOURS[i % len(COLOURS)], label=c) for i, c in enumerate(stats.corners)]
        fig.legend(handles=handles, loc="outside lower center", ncols=min(len(handles), 6), fontsize=8, frameon=False)
    fig.suptitle(f"{Path(run.plan.plan.path).name}: {_headline(stats)}", fontsize=10)
    return fig


def _headline(stats: YieldStatistics) -> str:
    from netloop.report.yield_text import percent, share

    y = stats.deciding
    where = [f"{n} {word}" for n, word in ((len(stats.corners), "corners"), (len(stats.nodes), "break nodes")) if n > 1]
    what = f"{y.samples} dies at {' and '.join(where)}" if y.corner == "" and where else f"{y.samples} samples"
    return (f"{what}: every requirement met by {percent(y.estimate)} (yield >= {percent(y.lower, 'down')} at {share(y.confidence)} "
            "confidence)")


def scatter_figure(run: SampleRun):
    """Phase margin against crossover frequency, one point a sample: green passes, red fails, grey has no verdict."""
    stats = run.statistics
    fig = new_figure(8.0, 5.6)
    ax = fig.subplots()
    seen: set[str] = set()
    shown: list[float] = []
    for i, corner in enumerate(stats.corners):
        marker = MARKERS[i % len(MARKERS)]
        for verdict, colour, word in (("pass", PASSES, "pass"), ("fail", FAILS, "fail"), ("inconclusive", NO_VERDICT, "no verdict")):
            pts = [(s.figures["fc"], s.figures["pm"]) for s in stats.samples
                   if s.corner == corner and s.verdict == verdict and s.figures.get("fc") is not None and s.figures.get("pm") is not None]
            if not pts:
                continue
            label = f"{word}" + (f", {corner}" if len(stats.corners) > 1 else "")
            rare = verdict != "pass"  # the few that fail or have no verdict are what the reader looks for: larger, on top
            ax.scatter([p[0] for p in pts], [p[1] for p in pts], s=44 if rare else 22, marker=marker, facecolors=colour,
                       edgecolors="black" if rare else "white", linewidths=0.6 if rare else 0.4, alpha=0.95 if rare else 0.8,
                       label=label, zorder=4 if rare else 3)
            seen.add(verdict)
            shown.extend(p[0] for p in pts)
    for threshold, _op, text in _thresholds(run, "pm"):
        ax.axhline(threshold, color=REQUIREMENT, linestyle="--", linewidth=1.2)
        ax.text(0.005, threshold, f" {text}", transform=ax.get_yaxis_transform(), va="bottom", fontsize=8, color=REQUIREMENT, zorder=5,
                bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.8, "pad": 1.0})
    for threshold, _op, text in _thresholds(run, "fc"):
        ax.axvline(threshold, color=REQUIREMENT, linestyle="--", linewidth=1.2)
        ax.text(threshold, 0.01, f" {text}", transform=ax.get_xaxis_transform(), va="bottom", fontsize=8, color=REQUIREMENT, rotation=90)
    ax.set_xlabel(f"crossover frequency ({_frequency_axis(ax.xaxis, shown)})", fontsize=9)
    ax.set_ylabel("phase margin (deg)", fontsize=9)
    ax.tick_params(labelsize=8)
    ax.grid(color="#e6e6e6", linewidth=0.6)
    ax.set_axisbelow(True)
    if seen:
        ax.legend(fontsize=8, frameon=False, loc="best")
    else:
        ax.text(0.5, 0.5, "no sample has both a crossover and a phase margin", transform=ax.transAxes, ha="center", fontsize=9)
    unmeasured = sum(1 for s in stats.samples if s.figures.get("fc") is None or s.figures.get("pm") is None)
    note = f"; {unmeasured} sample(s) without a crossover not shown" if unmeasured else ""
    ax.set_title(f"{Path(run.plan.plan.path).name}: phase margin against crossover frequency, {len(stats.samples)} samples{note}", fontsize=10)
    return fig


def scatter_path(path: str | Path) -> str:
    """FILE.png -> FILE-scatter.png: where the scatter goes beside the histograms."""
    return tagged_path(path, "scatter")


def plot_yield(run: SampleRun, path: str | Path) -> tuple[Path, Path]:
    """Write the histograms to ``path`` and the scatter beside it (``scatter_path``); .png, .svg or .pdf."""
    return (save(histogram_figure(run), path, "histograms"), save(scatter_figure(run), scatter_path(path), "scatter plot"))
