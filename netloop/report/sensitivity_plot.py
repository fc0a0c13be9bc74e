"""The ranking chart of a sensitivity run: one row per knob, the largest first, one panel per figure.

Each bar is a slope, the change of the figure per decade of the knob's value. Its colour says at a
glance whether raising the value helps (more phase or gain margin, less peaking) or hurts; the
crossover frequency is neither, so its bars are grey. The ranking figure's panel comes first and
is the widest; the value of each slope is written at the end of its bar.
"""

from __future__ import annotations

from pathlib import Path

from netloop.jobs.sensitivity.records import FIGURES, SensitivityRun
from netloop.report.figure import new_figure, save
from netloop.report.notation import eng
from netloop.report.sensitivity_text import FIGURE_NAMES, knob_value

__all__ = ["HELPS", "HURTS", "NEUTRAL", "SHOWN_BARS", "plot_sensitivities", "sensitivity_figure"]

SHOWN_BARS = 12
HELPS = "#2a7f62"
HURTS = "#c0392b"
NEUTRAL = "#7f8c8d"
_WIDTHS = (1.5, 1.0, 1.0, 1.0)  # the ranking figure's panel, then the others
_PANELS_PX = 1000.0  # about what the four panels take of the 11 in figure at 120 dpi
_CHAR_PX = 5.5  # about the width of one character of an 8 pt label
_ROOM = 1.7  # each panel reaches 1.7 times its longest bar either way
_BETTER_UP = {"pm": 1, "gm": 1, "fc": 0, "peak": -1}  # sign of a slope that helps (0: neither)


def _colour(figure: str, slope: float) -> str:
    way = _BETTER_UP[figure]
    if way == 0 or slope == 0:
        return NEUTRAL
    return HELPS if (slope > 0) == (way > 0) else HURTS


def _label(figure: str, slope: float) -> str:
    if figure == "fc":
        text = eng(slope, "")  # "54.0 M": the axis says Hz/decade
    else:
        text = f"{slope:.3g}"
    return text if text.startswith("-") else "+" + text


def sensitivity_figure(run: SensitivityRun):
    """The ranking chart (a matplotlib Figure) of the knobs with the largest slopes."""
    from matplotlib.ticker import MaxNLocator  # noqa: PLC0415 - lazy, like the figure itself

    shown = [s for s in run.sensitivities if s.slope(run.rank_by).per_decade is not None][:SHOWN_BARS]
    order = [run.rank_by, *(f for f in FIGURES if f != run.rank_by)]
    rows = max(len(shown), 1)
    fig = new_figure(11.0, 1.9 + 0.34 * rows)
    axes = fig.subplots(1, len(order), sharey=True, gridspec_kw={"width_ratios": list(_WIDTHS)})
    y = list(range(len(shown)))
    panel_px = {f: w / sum(_WIDTHS) * _PANELS_PX for f, w in zip(order, _WIDTHS, strict=True)}
    names = [f"{s.knob.name}  ({knob_value(s.value, s.knob.unit)})" for s in shown]
    for ax, figure in zip(axes, order, strict=True):
        values = [s.slope(figure).per_decade for s in shown]
        errors = [s.slope(figure).error for s in shown]
        finite = [v for v in values if v is not None]
        reach = max((abs(v) for v in finite), default=1.0) or 1.0
        for yi, v, e in zip(y, values, errors, strict=True):
            if v is None:
                ax.text(0.0, yi, "  none", va="center", ha="left", fontsize=8, color=NEUTRAL)
                continue
            ax.barh(yi, v, height=0.62, color=_colour(figure, v), edgecolor="none")
            if e is not None and e > 0.02 * reach:
                ax.errorbar(v, yi, xerr=e, fmt="none", ecolor="#333333", elinewidth=0.8, capsize=2)
            label_span = (len(_label(figure, v)) + 2) * _CHAR_PX / (panel_px[figure] / (2 * _ROOM)) * reach
            inside = abs(v) + label_span > _ROOM * reach and abs(v) > label_span  # no room beyond the bar, room in it
            ax.text(v, yi, f" {_label(figure, v)} ", va="center", ha=("right" if v >= 0 else "left") if inside else ("left" if v >= 0 else "right"),
                    fontsize=8, color="white" if inside else "#222222")
        ax.axvline(0.0, color="#444444", linewidth=0.8)
        ax.set_xlim(-_ROOM * reach, _ROOM * reach)
        ax.set_title(FIGURE_NAMES[figure], fontsize=10, fontweight="bold" if figure == run.rank_by else "normal")
        ax.set_xlabel(FIGURES[figure][2], fontsize=9)
        ax.tick_params(axis="x", labelsize=8)
        ax.xaxis.set_major_locator(MaxNLocator(nbins=4, symmetric=True))
        if figure == "fc":
            ax.xaxis.set_major_formatter(lambda v, _pos: eng(v, "Hz", 2) if v else "0")
        ax.grid(axis="x", color="#dddddd", linewidth=0.6)
        ax.set_axisbelow(True)
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
    axes[0].set_yticks(y, names, fontsize=9)
    axes[0].invert_yaxis()
    n = run.nominal
    m = n.analysis.margins
    now = ", ".join(p for p in (
        f"PM {m.phase_margin_deg:.2f}°" if m.phase_margin_deg is not None else "",
        f"GM {m.gain_margin_db:.2f} dB" if m.gain_margin_db is not None else "",
        f"fc {eng(m.unity_gain_hz, 'Hz')}" if m.unity_gain_hz is not None else "",
    ) if p)
    more = len(run.sensitivities) - len(shown)
    fig.suptitle(
        f"What sets the margins: {Path(n.netlist).name}, loop broken at {n.breaks.node} ({now})\n"
        f"change of each figure per decade of a value, ranked by {FIGURE_NAMES[run.rank_by]}"
        + (f"; {more} more knob(s) not shown" if more > 0 else ""),
        fontsize=10,
    )
    from matplotlib.patches import Patch  # noqa: PLC0415

    handles = [Patch(color=HELPS, label="raising the value helps"), Patch(color=HURTS, label="raising the value hurts"),
               Patch(color=NEUTRAL, label="neither (crossover frequency)")]
    fig.legend(handles=handles, loc="outside lower center", ncols=3, fontsize=8, frameon=False)
    if not shown:
        axes[0].text(0.5, 0.5, "no slope to show", transform=axes[0].transAxes, ha="center")
    return fig


def plot_sensitivities(run: SensitivityRun, path: str | Path) -> Path:
    """Write the ranking chart to ``path`` (.png, .svg or .pdf); returns the path."""
    return save(sensitivity_figure(run), path, "sensitivity chart")


