"""Place margin labels on a plot so that they do not overlap: a tiny greedy placer in axes fractions."""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = ["Label", "place_labels", "several_title"]

_CHAR_PT = 5.4  # mean advance of a character at the label font size (8.5 pt DejaVu Sans), in points
_LINE_PT = 15.0  # height of a label with its box, in points
_GAP_PT = 5.0  # distance between the marked point and its label
_MARKER_PT = 6.0  # half-size of a marker that labels keep clear of


@dataclass(frozen=True, slots=True)
class Label:
    """A label for a point given in data coordinates, with its colour and weight."""

    x: float
    y: float
    text: str
    colour: str
    bold: bool = False


def _to_fraction(ax, x: float, y: float) -> tuple[float, float]:
    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    fx = (math.log10(x) - math.log10(x0)) / (math.log10(x1) - math.log10(x0)) if ax.get_xscale() == "log" else (x - x0) / (x1 - x0)
    return fx, (y - y0) / (y1 - y0)


def place_labels(ax, labels: list[Label], width_pt: float, height_pt: float, avoid: tuple[tuple[float, float], ...] = ()) -> None:
    """Write each label beside its point (right of it, or left near the right edge), moved down or up past
    labels already placed and the `avoid` points (data coordinates, e.g. markers) when they would overlap,
    with a thin leader line when moved; the axes limits must be final."""
    gap = _GAP_PT / width_pt
    line_h = _LINE_PT / height_pt
    mx, my = _MARKER_PT / width_pt, _MARKER_PT / height_pt
    placed: list[tuple[float, float, float, float]] = []  # x0, x1, y0, y1 in axes fractions
    for px, py in avoid:
        fx, fy = _to_fraction(ax, px, py)
        placed.append((fx - mx, fx + mx, fy - my, fy + my))
    for lab in sorted(labels, key=lambda lab: (lab.x, -lab.y)):
        fx, fy = _to_fraction(ax, lab.x, lab.y)
        width = (len(lab.text) * _CHAR_PT + 8.0) / width_pt
        prefer_left = fx + gap + width > 0.995
        sides = (prefer_left, not prefer_left)
        start = min(max(fy, line_h / 2 + 0.01), 1 - line_h / 2 - 0.01)
        choice = None
        for step in range(60):
            y = start + (step + 1) // 2 * line_h * 0.5 * (1 if step % 2 else -1)
            if not line_h / 2 <= y <= 1 - line_h / 2:
                continue
            for left in sides:
                x0 = fx - gap - width if left else fx + gap
                if x0 < 0.005 or x0 + width > 0.995:
                    continue
                if all(x0 + width < a or x0 > b or y - line_h / 2 > d or y + line_h / 2 < c for a, b, c, d in placed):
                    choice = (left, x0, y)
                    break
            if choice:
                break
        if choice is None:  # crowded: keep it by its point
            choice = (prefer_left, fx - gap - width if prefer_left else fx + gap, start)
        left, x0, y = choice
        placed.append((x0, x0 + width, y - line_h / 2, y + line_h / 2))
        moved = abs(y - fy) > line_h * 0.6
        ax.annotate(
            lab.text,
            xy=(lab.x, lab.y),
            xycoords="data",
            xytext=(x0 + width if left else x0, y),
            textcoords="axes fraction",
            ha="right" if left else "left",
            va="center",
            fontsize=8.5,
            color=lab.colour,
            fontweight="bold" if lab.bold else "normal",
            bbox={"boxstyle": "round,pad=0.2", "facecolor": "white", "edgecolor": "none", "alpha": 0.85},
            arrowprops={"arrowstyle": "-", "color": lab.colour, "lw": 0.6, "alpha": 0.7} if moved else None,
            zorder=6,
        )


def several_title(results) -> str:
    """The title of an overlay: the netlist(s), then what each curve is (its label, or its break node)."""
    from pathlib import Path

    names = sorted({Path(x.netlist).name for x in results})
    curves = list(dict.fromkeys(x.label or f"broken at {x.breaks.node}" for x in results))
    shown = ", ".join(curves[:6]) + (f", +{len(curves) - 6} more" if len(curves) > 6 else "")
    return f"{', '.join(names)}: {shown}"
