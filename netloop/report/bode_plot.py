"""Bode plot of the return ratio: magnitude and phase against log frequency, with every margin drawn on it.

One loop: each gain crossover gets a vertical line and a double arrow on the phase plot from the
curve to the nearest odd multiple of 180 deg, labelled "PM 62.31° @ 1.23 MHz"; each phase
crossover a double arrow on the magnitude plot from the curve to 0 dB, labelled "GM 12.10 dB"
(lower gain margins in their own colour); phase crossovers below the numerical floor are grey
crosses. The worst figures are in bold. Several loops: one colour per loop, crossovers as
markers, and the margins in the legend.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from pathlib import Path

import numpy as np

from netloop.jobs.loop_result import LoopResult
from netloop.report.figure import COLOURS, as_results, file_format, loop_name, new_figure, save
from netloop.report.labels import Label, place_labels, several_title
from netloop.report.notation import eng
from netloop.report.phrases import phase_crossover_margin
from netloop.report.samples import sample_table

__all__ = ["bode_figure", "plot_bode"]

PM_OK = "#2e7d32"
PM_BAD = "#c62828"
GM_UPPER = "#5e35b1"
GM_LOWER = "#e65100"
# The margin that governs (the worst phase margin, the nearest gain margin of each kind) gets the biggest mark; the
# others (a crossing at -540 deg far below 0 dB, say) are drawn thin and faint, so they never outweigh it
_ARROW = {True: 2.2, False: 0.8}
_MARK = {True: 7, False: 4}
_FAINT = 0.55
IGNORED = "#9e9e9e"
CURVE = "#1f5fa8"
_DEEPEST_DB = 200.0  # the magnitude axis shows at most this many dB below the top of the curve


def _odd_180(phase_deg: float) -> float:
    """The odd multiple of 180 deg nearest to phase_deg."""
    return 180.0 * (2 * round((phase_deg + 180.0) / 360.0) - 1)


def _limits(values: Sequence[np.ndarray], step: float, pad: float, include: float, floor_span: float | None = None):
    hi = max(float(np.max(v)) for v in values)
    span = math.inf if floor_span is None else floor_span
    lo = min(max(float(np.min(v)), float(np.max(v)) - span) for v in values)
    lo, hi = min(lo, include), max(hi, include)
    return math.floor((lo - pad) / step) * step, math.ceil((hi + pad) / step) * step


def verdict_title(result: LoopResult) -> str:
    """The verdict of one loop in a few words, for titles and legends."""
    m = result.analysis.margins
    word = result.analysis.classification.upper()
    parts = []
    if m.phase_margin_deg is not None:
        parts.append(f"PM {m.phase_margin_deg:.2f}°")
    if m.gain_margin_db is not None:
        parts.append(f"GM {m.gain_margin_db:.2f} dB")
    if m.lower_gain_margin_db is not None:
        parts.append(f"lower GM {m.lower_gain_margin_db:.2f} dB")
    return f"{word}" + (f" ({', '.join(parts)})" if parts else "")


def _title(results: Sequence[LoopResult]) -> str:
    r = results[0]
    if len(results) == 1:
        where = f"{Path(r.netlist).name}, loop broken at {r.breaks.node}" + (f" [{r.label}]" if r.label else "")
        return f"{where}\n{verdict_title(r)}"
    return several_title(results)


def _style_axes(fig, ax_mag, ax_ph, phase_lo: float, phase_hi: float) -> None:
    from matplotlib.ticker import EngFormatter, LogLocator, MultipleLocator, NullFormatter  # noqa: PLC0415

    span = phase_hi - phase_lo
    ax_ph.yaxis.set_major_locator(MultipleLocator(45 if span <= 360 else 90 if span <= 720 else 180))
    ax_ph.xaxis.set_major_locator(LogLocator(base=10.0, numticks=13))
    ax_ph.xaxis.set_major_formatter(EngFormatter(unit="Hz", sep=" "))
    ax_ph.xaxis.set_minor_formatter(NullFormatter())
    mag_lo, mag_hi = ax_mag.get_ylim()
    mag_span = mag_hi - mag_lo
    ax_mag.yaxis.set_major_locator(MultipleLocator(20 if mag_span <= 200 else 40))
    ax_mag.set_ylabel("|T|  (dB)")
    ax_ph.set_ylabel("phase of T  (deg)")
    ax_ph.set_xlabel("frequency")
    for ax in (ax_mag, ax_ph):
        ax.grid(True, which="major", color="#d0d0d0", lw=0.7)
        ax.grid(True, which="minor", axis="x", color="#ececec", lw=0.5)
        ax.tick_params(labelsize=9)


def _single_annotations(ax_mag, ax_ph, r: LoopResult, f: np.ndarray) -> tuple[list, list]:
    a = r.analysis
    m = a.margins
    stable = a.stable
    mag_labels: list[Label] = []
    ph_labels: list[Label] = []
    for c in a.gain_crossovers:
        colour = PM_OK if c.phase_margin_deg > 0 else PM_BAD
        ref = _odd_180(c.phase_deg)
        for ax in (ax_mag, ax_ph):
            ax.axvline(c.freq_hz, color=colour, lw=0.9, ls=":", alpha=0.8, zorder=2)
        worst = m.unity_gain_hz is not None and c.freq_hz == m.unity_gain_hz
        ax_mag.plot([c.freq_hz], [0.0], "o", color=colour, ms=_MARK[worst], zorder=5)
        ax_ph.annotate("", xy=(c.freq_hz, c.phase_deg), xytext=(c.freq_hz, ref),
                       arrowprops={"arrowstyle": "<|-|>", "color": colour, "lw": _ARROW[worst], "shrinkA": 0, "shrinkB": 0,
                                   "mutation_scale": 9, "alpha": 1.0 if worst else _FAINT}, zorder=5)
        text = f"PM {c.phase_margin_deg:.2f}° @ {eng(c.freq_hz, 'Hz')}" + ("" if c.direction == "down" else " (rising)")
        ph_labels.append(Label(c.freq_hz, (c.phase_deg + ref) / 2, text, colour, worst))
    f_lo = float(f[0])
    for c in a.phase_crossovers:
        x = c.freq_hz if c.freq_hz > 0 else f_lo
        colour = GM_UPPER if c.kind == "upper" else GM_LOWER
        for ax in (ax_mag, ax_ph):
            ax.axvline(x, color=colour, lw=0.9, ls=":", alpha=0.8, zorder=2)
        worst = c.freq_hz == (m.lower_phase_crossover_hz if c.kind == "lower" and stable else m.phase_crossover_hz)
        ax_ph.plot([x], [c.phase_deg], "s", color=colour, ms=_MARK[worst], zorder=5)
        shown_gain = max(c.gain_db, ax_mag.get_ylim()[0])
        ax_mag.annotate("", xy=(x, shown_gain), xytext=(x, 0.0),
                        arrowprops={"arrowstyle": "<|-|>", "color": colour, "lw": _ARROW[worst], "shrinkA": 0, "shrinkB": 0,
                                    "mutation_scale": 9, "alpha": 1.0 if worst else _FAINT}, zorder=5)
        where = "DC" if c.freq_hz == 0 else eng(c.freq_hz, "Hz")
        text = f"{phase_crossover_margin(c, stable)} @ {where}"
        mag_labels.append(Label(x, (shown_gain + 0.0) / 2, text, colour, worst))
    if a.ignored_phase_crossovers:
        xs = [c.freq_hz for c in a.ignored_phase_crossovers]
        ys = [c.phase_deg for c in a.ignored_phase_crossovers]
        n = len(xs)
        ax_ph.plot(xs, ys, "x", color=IGNORED, ms=6, mew=1.4, zorder=4,
                   label=f"{n} phase crossover{'s' if n > 1 else ''} below the {a.floor_db:.0f} dB floor (ignored)")
    return mag_labels, ph_labels


def _overlay_markers(ax_mag, ax_ph, r: LoopResult, colour: str) -> None:
    a = r.analysis
    for c in a.gain_crossovers:
        ax_mag.plot([c.freq_hz], [0.0], "o", color=colour, ms=5, zorder=5)
        ax_ph.plot([c.freq_hz], [c.phase_deg], "o", color=colour, ms=5, zorder=5)
    for c in a.phase_crossovers:
        x = c.freq_hz if c.freq_hz > 0 else float(a.freq_hz[0])
        ax_mag.plot([x], [c.gain_db], "s", color=colour, ms=5, zorder=5)
        ax_ph.plot([x], [c.phase_deg], "s", color=colour, ms=5, zorder=5)
    if a.ignored_phase_crossovers:
        ax_ph.plot([c.freq_hz for c in a.ignored_phase_crossovers], [c.phase_deg for c in a.ignored_phase_crossovers],
                   "x", color=IGNORED, ms=5, zorder=4)


def bode_figure(results: LoopResult | Iterable[LoopResult]):
    """The Bode figure (a matplotlib Figure, not registered with pyplot) of one loop or an overlay of several."""
    rs = as_results(results)
    single = len(rs) == 1
    fig = new_figure(9.0, 7.2)
    ax_mag, ax_ph = fig.subplots(2, 1, sharex=True)
    tables = [sample_table(r) for r in rs]
    for i, (r, tab) in enumerate(zip(rs, tables)):
        colour = CURVE if single else COLOURS[i % len(COLOURS)]
        name = "T (return ratio)" if single else f"{loop_name(r, rs)}: {verdict_title(r)}"
        ax_mag.semilogx(tab[:, 0], tab[:, 3], color=colour, lw=1.7, label=name, zorder=3)
        ax_ph.semilogx(tab[:, 0], tab[:, 4], color=colour, lw=1.7, zorder=3)

    f_all = np.concatenate([t[:, 0] for t in tables])
    ax_ph.set_xlim(float(f_all.min()), float(f_all.max()))
    mag_lo, mag_hi = _limits([t[:, 3] for t in tables], 20.0, 5.0, 0.0, _DEEPEST_DB)
    ax_mag.set_ylim(mag_lo, mag_hi)
    refs = [np.array([_odd_180(c.phase_deg) for r in rs for c in r.analysis.gain_crossovers] or [-180.0])]
    ph_lo, ph_hi = _limits([t[:, 4] for t in tables] + refs, 45.0, 10.0, -180.0)  # room for every margin arrow
    ax_ph.set_ylim(ph_lo, ph_hi)

    ax_mag.axhline(0.0, color="black", lw=1.0, zorder=2)
    for k in range(int(math.floor(ph_lo / 360.0)) - 1, int(math.ceil(ph_hi / 360.0)) + 1):
        ref = 360.0 * k - 180.0
        if ph_lo <= ref <= ph_hi:
            ax_ph.axhline(ref, color="black", lw=1.0, zorder=2)
    floors = {r.analysis.floor_db for r in rs}
    for floor in floors:
        if any(float(np.min(t[:, 3])) < floor for t in tables) and floor >= mag_lo:
            ax_mag.axhline(floor, color=IGNORED, lw=0.9, ls="--", zorder=2, label=f"numerical floor ({floor:.0f} dB)")

    _style_axes(fig, ax_mag, ax_ph, ph_lo, ph_hi)
    fig.suptitle(_title(rs), fontsize=11)
    if single:
        a = rs[0].analysis
        mag_labels, ph_labels = _single_annotations(ax_mag, ax_ph, rs[0], tables[0][:, 0])
        f = tables[0][:, 0]
        mag_marks = tuple((c.freq_hz, 0.0) for c in a.gain_crossovers) + tuple(zip(f, tables[0][:, 3]))
        ph_marks = tuple((c.freq_hz if c.freq_hz > 0 else float(f[0]), c.phase_deg) for c in a.phase_crossovers)
        ph_marks += tuple(zip(f, tables[0][:, 4]))  # labels keep clear of the curve too
        fig.draw_without_rendering()  # final layout, so that axes sizes are known to the label placer
        for ax, labels, marks in ((ax_mag, mag_labels, mag_marks), (ax_ph, ph_labels, ph_marks)):
            box = ax.get_window_extent()
            place_labels(ax, labels, box.width * 72.0 / fig.dpi, box.height * 72.0 / fig.dpi, marks)
        _key(ax_mag, ax_ph, rs[0])
    else:
        from matplotlib.lines import Line2D  # noqa: PLC0415

        for i, r in enumerate(rs):
            _overlay_markers(ax_mag, ax_ph, r, COLOURS[i % len(COLOURS)])
        handles = ax_mag.get_legend_handles_labels()[0]
        handles += [
            Line2D([], [], color="#444444", marker="o", ls="none", label="gain crossover (|T| = 0 dB)"),
            Line2D([], [], color="#444444", marker="s", ls="none", label="phase crossover (odd multiple of 180°)"),
        ]
        fig.legend(handles=handles, fontsize=8, loc="outside lower center", ncols=2, framealpha=0.9)
    return fig


def _key(ax_mag, ax_ph, r: LoopResult) -> None:
    """A small legend of what the colours mean (only the kinds present)."""
    from matplotlib.lines import Line2D  # noqa: PLC0415

    a = r.analysis
    handles = [Line2D([], [], color=CURVE, lw=1.7, label="T (return ratio)")]
    if any(c.phase_margin_deg > 0 for c in a.gain_crossovers):
        handles.append(Line2D([], [], color=PM_OK, marker="o", ls=":", label="gain crossover, phase margin"))
    if any(c.phase_margin_deg <= 0 for c in a.gain_crossovers):
        handles.append(Line2D([], [], color=PM_BAD, marker="o", ls=":", label="gain crossover, no margin"))
    if any(c.kind == "upper" for c in a.phase_crossovers):
        handles.append(Line2D([], [], color=GM_UPPER, marker="s", ls=":", label="phase crossover, gain margin"))
    if any(c.kind == "lower" for c in a.phase_crossovers):
        handles.append(Line2D([], [], color=GM_LOWER, marker="s", ls=":", label="phase crossover, |T| > 1 (lower)"))
    extra_mag = [h for h in ax_mag.get_legend_handles_labels()[0] if h.get_label().startswith("numerical floor")]
    ax_mag.legend(handles=handles + extra_mag, fontsize=8, loc="best", framealpha=0.9)
    ph_handles = ax_ph.get_legend_handles_labels()[0]
    if ph_handles:
        ax_ph.legend(handles=ph_handles, fontsize=8, loc="best", framealpha=0.9)


def plot_bode(results: LoopResult | Iterable[LoopResult], path: str | Path) -> Path:
    """Write the Bode plot of one loop (or an overlay of several) to path; PNG, SVG or PDF by its extension."""
    file_format(path)  # a wrong extension fails before any drawing
    return save(bode_figure(results), path, "Bode plot")
