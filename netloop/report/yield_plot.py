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
from netloop.report.notation import eng
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


def _frequency_axis(axis) -> None:
    axis.set_major_formatter(lambda v, _pos: eng(v, "Hz", 3) if v else "0")


def histogram_figure(run: SampleRun):
    """One histogram per figure (phase margin, gain margin, crossover frequency, peaking), requirement lines drawn."""
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
        ax.hist([vs for _, vs in series], bins=bins, stacked=True, color=colours, edgecolor="white", linewidth=0.4,
                label=[c for c, _ in series] if len(series) > 1 else None)
        for threshold, op, text in lines:
            ax.axvline(threshold, color=REQUIREMENT, linestyle="--", linewidth=1.4)
            if op in (">=", ">"):
                ax.axvspan(bins[0], threshold, color=REQUIREMENT, alpha=0.07, linewidth=0)
            else:
                ax.axvspan(threshold, bins[-1], color=REQUIREMENT, alpha=0.07, linewidth=0)
            ax.text(threshold, 0.98, f" {text} ", transform=ax.get_xaxis_transform(), ha="left" if op in (">=", ">") else "right",
                    va="top", fontsize=8, color=REQUIREMENT)
        ax.set_xlim(bins[0], bins[-1])
        mean = sum(every) / len(every)
        ax.set_title(f"{name}: {len(every)} samples, mean {figure_text(figure, mean)}", fontsize=10)
        if unit == "Hz":
            _frequency_axis(ax.xaxis)
            ax.set_xlabel("")
        ax.tick_params(labelsize=8)
        ax.grid(axis="y", color="#e3e3e3", linewidth=0.6)
        ax.set_axisbelow(True)
        if len(series) > 1:
            ax.legend(fontsize=7, frameon=False, loc="upper right" if not lines else "best")
    fig.suptitle(f"{Path(run.plan.plan.path).name}: {_headline(stats)}", fontsize=10)
    return fig


def _headline(stats: YieldStatistics) -> str:
    from netloop.report.yield_text import percent, share

    y = stats.deciding
    return (f"{len(stats.samples)} samples, yield {percent(y.estimate)} (>= {percent(y.lower, 'down')} at {share(y.confidence)} "
            f"confidence), every requirement")


def scatter_figure(run: SampleRun):
    """Phase margin against crossover frequency, one point a sample: green passes, red fails, grey has no verdict."""
    stats = run.statistics
    fig = new_figure(8.0, 5.6)
    ax = fig.subplots()
    seen = set()
    for i, corner in enumerate(stats.corners):
        marker = MARKERS[i % len(MARKERS)]
        for verdict, colour, word in (("pass", PASSES, "pass"), ("fail", FAILS, "fail"), ("inconclusive", NO_VERDICT, "no verdict")):
            pts = [(s.figures["fc"], s.figures["pm"]) for s in stats.samples
                   if s.corner == corner and s.verdict == verdict and s.figures.get("fc") is not None and s.figures.get("pm") is not None]
            if not pts:
                continue
            label = f"{word}" + (f", {corner}" if len(stats.corners) > 1 else "")
            ax.scatter([p[0] for p in pts], [p[1] for p in pts], s=18, marker=marker, facecolors=colour,
                       edgecolors="white", linewidths=0.4, alpha=0.85, label=label, zorder=3)
            seen.add(verdict)
    for threshold, _op, text in _thresholds(run, "pm"):
        ax.axhline(threshold, color=REQUIREMENT, linestyle="--", linewidth=1.2)
        ax.text(0.005, threshold, f" {text}", transform=ax.get_yaxis_transform(), va="bottom", fontsize=8, color=REQUIREMENT)
    for threshold, _op, text in _thresholds(run, "fc"):
        ax.axvline(threshold, color=REQUIREMENT, linestyle="--", linewidth=1.2)
        ax.text(threshold, 0.01, f" {text}", transform=ax.get_xaxis_transform(), va="bottom", fontsize=8, color=REQUIREMENT, rotation=90)
    _frequency_axis(ax.xaxis)
    ax.set_xlabel("crossover frequency", fontsize=9)
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
    p = Path(path)
    return str(p.with_name(f"{p.stem}-scatter{p.suffix}"))


def plot_yield(run: SampleRun, path: str | Path) -> tuple[Path, Path]:
    """Write the histograms to ``path`` and the scatter beside it (``scatter_path``); .png, .svg or .pdf."""
    return (save(histogram_figure(run), path, "histograms"), save(scatter_figure(run), scatter_path(path), "scatter plot"))
