"""The worst phase margin of each corner over several runs: a table, a chart and a JSON document."""

from __future__ import annotations

import math
from pathlib import Path

from netloop.jobs.runs.trend import Trend, TrendRow
from netloop.report.figure import COLOURS, file_format, new_figure, save
from netloop.report.notation import NONE

__all__ = ["HIGHLIGHTED", "plot_trend", "run_labels", "trend_document", "trend_figure", "trend_table"]

HIGHLIGHTED = 8
"""The corners with the lowest phase margin in the latest run are drawn in colour and named; the rest in grey."""


def run_labels(trend: Trend) -> list[str]:
    """One label per run: "1 a.results.jsonl (2026-03-01 14:02 UTC)"; the time when the file records it."""
    out = []
    for i, run in enumerate(trend.runs, start=1):
        when = f" ({run.started[:16].replace('T', ' ')} UTC)" if run.started else ""
        out.append(f"{i} {run.name}{when}")
    return out


def _latest(row: TrendRow) -> float:
    last = row.phase_margin_deg[-1]
    return math.inf if last is None else last


def _ordered(trend: Trend) -> list[TrendRow]:
    """Worst phase margin in the latest run first; corners missing from it last."""
    return sorted(trend.rows, key=lambda r: (_latest(r), r.corner))


def _cell(pm: float | None, outcome: str) -> str:
    if outcome == "":
        return "absent"
    text = NONE if pm is None else f"{pm:.2f}"
    return text if outcome == "pass" else f"{text} {outcome}"


def trend_table(trend: Trend) -> str:
    """Runs listed first, then one row per corner (lowest phase margin in the latest run first): its worst phase
    margin in each run in deg (with the outcome when not pass; "absent" when the run did not have it) and the change
    from its first run to its latest."""
    labels = run_labels(trend)
    head = ["corner", *(f"run {i}" for i in range(1, len(labels) + 1)), "change"]
    rows = []
    for row in _ordered(trend):
        drop = row.latest_drop_deg
        rows.append([row.corner, *(_cell(p, o) for p, o in zip(row.phase_margin_deg, row.outcomes, strict=True)),
                     NONE if drop is None else f"{-drop:+.2f}"])
    widths = [max(len(str(x)) for x in col) for col in zip(head, *rows)]
    table = ["  ".join(str(x).ljust(w) for x, w in zip(r, widths)).rstrip() for r in (head, *rows)]
    table.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(["worst phase margin (deg) of each corner, over its break nodes, in each run:",
                      *(f"  run {label}" for label in labels), "", *table])


def trend_document(trend: Trend) -> dict:
    """{"schema": "netloop.trend/1", "runs": [{file, plan, started}], "corners": [{corner, phase_margin_deg: [...],
    outcomes: [...]}]}: one entry per run in the order given; null where a run has no phase margin for the corner,
    outcome "" where the run did not have the corner."""
    return {
        "schema": "netloop.trend/1",
        "runs": [{"file": r.path, "plan": r.plan, "started": r.started or None} for r in trend.runs],
        "corners": [{"corner": row.corner, "phase_margin_deg": list(row.phase_margin_deg), "outcomes": list(row.outcomes)}
                    for row in _ordered(trend)],
    }


def trend_figure(trend: Trend):
    """The worst phase margin of every corner against the runs (a matplotlib Figure): the corners lowest in the
    latest run in colour and named, the others in grey."""
    labels = run_labels(trend)
    fig = new_figure(9.5, 5.8)
    ax = fig.subplots()
    x = list(range(1, len(labels) + 1))
    ordered = _ordered(trend)
    for rank, row in reversed(list(enumerate(ordered))):  # the highlighted ones drawn last, on top
        ys = [math.nan if p is None else p for p in row.phase_margin_deg]
        if rank < HIGHLIGHTED:
            ax.plot(x, ys, marker="o", ms=5, lw=1.6, color=COLOURS[rank % len(COLOURS)], label=row.corner, zorder=3, gid="corner")
        else:
            ax.plot(x, ys, marker=".", ms=3, lw=0.8, color="#b0b0b0", zorder=2, gid="corner")
    ax.set_xticks(x, [label.replace(" (", "\n(") for label in labels], fontsize=8)
    ax.set_xlim(0.7, len(x) + 0.3)
    ax.set_ylabel("worst phase margin (deg)")
    ax.grid(True, color="#d8d8d8", lw=0.7)
    others = len(ordered) - min(len(ordered), HIGHLIGHTED)
    title = "worst phase margin of each corner, run by run"
    if others:
        title += f"\nthe {HIGHLIGHTED} lowest in the latest run named; {others} other corner(s) in grey"
    fig.suptitle(title, fontsize=11)
    if ordered:
        handles, names = ax.get_legend_handles_labels()
        pairs = sorted(zip(handles, names, strict=True), key=lambda p: [r.corner for r in ordered].index(p[1]))
        fig.legend([h for h, _ in pairs], [n for _, n in pairs], fontsize=8, loc="outside right upper", framealpha=0.9,
                   title="corner (lowest first)", title_fontsize=8)
    return fig


def plot_trend(trend: Trend, path: str | Path) -> Path:
    """Write the trend chart to path; PNG, SVG or PDF by its extension."""
    file_format(path)
    return save(trend_figure(trend), path, "trend chart")
