"""Nyquist plot of the return ratio with a compressed radius, so an 80 dB loop and the neighbourhood of -1 fit one picture.

A point T = r e^{j theta} is drawn at r' e^{j theta} with r' = r for r <= 1 (the unit disc, where
-1 and the margins live, is drawn to scale) and r' = 1 + log10(r) / 2 beyond (each decade of |T|
above 1 adds half a unit of radius, so an 80 dB loop spans three units and the unit disc a third
of the picture). Rings mark the true |T| = 1, 10, 100, ... The curve for positive
frequencies is solid with arrows in the direction of increasing frequency; its mirror image
(negative frequencies, T(-jw) = conj T(jw)) is dashed. For one loop the margins are drawn too,
with their values in the legend below the plot (labels inside would crowd the neighbourhood of -1):
each phase margin as an arc of the unit circle from -1 to the gain crossover, each gain margin as
a segment of the negative real axis from the phase crossover to -1, and the modulus margin as the
segment from -1 to the nearest point of the curve.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from pathlib import Path

import numpy as np

from netloop.jobs.loop_result import LoopResult
from netloop.report.bode_plot import CURVE, GM_LOWER, GM_UPPER, PM_BAD, PM_OK, verdict_title
from netloop.report.figure import COLOURS, as_results, file_format, loop_name, new_figure, save
from netloop.report.notation import eng
from netloop.report.labels import several_title
from netloop.report.phrases import origin_phrase, phase_crossover_margin
from netloop.report.samples import sample_table

__all__ = ["compress_radius", "nyquist_figure", "plot_nyquist"]

_RING = "#9a9a9a"
_MAX_RINGS = 14
_ARROWS = 7
_MAX_ENTRIES = 10


DECADE = 0.5
"""Drawn radius added by each decade of |T| above 1."""


def compress_radius(t) -> np.ndarray:
    """Map T = r e^{j theta} to r' e^{j theta}, r' = r for r <= 1 and 1 + DECADE log10(r) beyond (complex array)."""
    t = np.asarray(t, dtype=complex)
    r = np.abs(t)
    rc = np.where(r <= 1.0, r, 1.0 + DECADE * np.log10(np.maximum(r, 1.0)))
    return rc * np.exp(1j * np.angle(t))


# Where a ring's label may sit (degrees), the first that is clear of the curves (of both halves) wins the ties
_LABEL_ANGLES = (62.0, -62.0, 118.0, -118.0, 30.0, -30.0, 150.0, -150.0)


def _clear_angle(drawn: np.ndarray, radius: float) -> float:
    """The angle (radians) on the ring of ``radius`` whose label anchor is farthest from every drawn curve point."""
    best, far = math.radians(_LABEL_ANGLES[0]), -1.0
    for deg_ in _LABEL_ANGLES:
        p = radius * complex(math.cos(math.radians(deg_)), math.sin(math.radians(deg_)))
        # the label stands right of and above its anchor: look a little past it too
        d = float(np.min(np.abs(drawn - p) + np.abs(drawn - p * complex(1.08, 0.04)))) / 2.0
        if d > far + 1e-9:
            best, far = math.radians(deg_), d
    return best


def _ring_label(k: int) -> str:
    value = 10**k
    text = f"{value:g}" if k < 5 else f"1e{k}"
    return f"|T| = {text} ({20 * k} dB)"


def _arrows(ax, z: np.ndarray, colour: str, radius: float, alpha: float = 1.0) -> None:
    """Arrow heads along the curve z in the order of its samples, spaced evenly in drawn length."""
    if z.size < 3:
        return
    steps = np.abs(np.diff(z))
    arc = np.concatenate([[0.0], np.cumsum(steps)])
    total = arc[-1]
    if total <= 0:
        return
    min_step = 0.015 * radius
    for target in np.linspace(0, total, _ARROWS + 2)[1:-1]:
        i = int(np.searchsorted(arc, target))
        i = min(max(i, 0), z.size - 2)
        j = i + 1
        while j < z.size - 1 and abs(z[j] - z[i]) < min_step:
            j += 1
        if abs(z[j] - z[i]) == 0:
            continue
        ax.annotate("", xy=(z[j].real, z[j].imag), xytext=(z[i].real, z[i].imag),
                    arrowprops={"arrowstyle": "-|>", "color": colour, "lw": 0, "mutation_scale": 13, "alpha": alpha,
                                "shrinkA": 0, "shrinkB": 0}, zorder=4)


def _smooth(result: LoopResult, per_interval: int = 8) -> np.ndarray:
    """T on a finer grid for drawing: gain (dB) and continuous phase interpolated linearly in log-frequency,
    exactly the straight segments a Bode plot draws between samples, so arcs of a high-gain loop stay round."""
    table = sample_table(result)
    lx = np.log10(table[:, 0])
    fine = np.concatenate([np.linspace(lx[i], lx[i + 1], per_interval, endpoint=False) for i in range(lx.size - 1)] + [lx[-1:]])
    gain = np.interp(fine, lx, table[:, 3])
    phase = np.radians(np.interp(fine, lx, table[:, 4]))
    return 10.0 ** (gain / 20.0) * np.exp(1j * phase)


def _t_at(result: LoopResult, freq_hz: float) -> complex:
    """T at freq_hz, interpolated linearly in log-frequency on the samples (only to place a marker)."""
    f = np.asarray(result.analysis.freq_hz, dtype=float)
    t = np.asarray(result.analysis.t, dtype=complex)
    x = math.log10(max(freq_hz, f[0]))
    lx = np.log10(f)
    return complex(np.interp(x, lx, t.real), np.interp(x, lx, t.imag))


def _margins(ax, r: LoopResult) -> list:
    """Draw the margins of one loop (arcs, segments, the modulus line); return their legend entries, worst marked."""
    from matplotlib.lines import Line2D  # noqa: PLC0415

    a = r.analysis
    m = a.margins
    entries = []
    for c in a.gain_crossovers:
        colour = PM_OK if c.phase_margin_deg > 0 else PM_BAD
        ref = 180.0 * (2 * round((c.phase_deg + 180.0) / 360.0) - 1)
        theta = np.radians(np.linspace(ref, c.phase_deg, 60))
        ax.plot(np.cos(theta), np.sin(theta), color=colour, lw=3.0, alpha=0.8, zorder=5, solid_capstyle="butt")
        ax.plot([math.cos(math.radians(c.phase_deg))], [math.sin(math.radians(c.phase_deg))], "o", color=colour, ms=5, zorder=6)
        worst = " (worst)" if len(a.gain_crossovers) > 1 and c.freq_hz == m.unity_gain_hz else ""
        entries.append(Line2D([], [], color=colour, lw=3.0, marker="o", ms=5,
                              label=f"PM {c.phase_margin_deg:.2f}° @ {eng(c.freq_hz, 'Hz')}{worst}: arc of |T| = 1 from -1"))
    for c in a.phase_crossovers:
        colour = GM_UPPER if c.kind == "upper" else GM_LOWER
        x = -float(compress_radius(10 ** (c.gain_db / 20.0)).real)
        text = phase_crossover_margin(c, a.stable)
        where = "DC" if c.freq_hz == 0 else eng(c.freq_hz, "Hz")
        if c.freq_hz == (m.lower_phase_crossover_hz if c.kind == "lower" and a.stable else m.phase_crossover_hz):
            # the governing margin of its kind: the one segment to -1 (segments of one kind would overlap on the axis)
            ax.plot([x, -1.0], [0.0, 0.0], color=colour, lw=3.0, alpha=0.8, zorder=5, solid_capstyle="butt")
            ax.plot([x], [0.0], "s", color=colour, ms=5, zorder=6)
            entries.append(Line2D([], [], color=colour, lw=3.0, marker="s", ms=5, label=f"{text} @ {where}: segment to -1"))
        else:  # a crossing that does not govern: its point on the axis, hollow
            ax.plot([x], [0.0], "s", mfc="white", mec=colour, ms=5, zorder=6)
            entries.append(Line2D([], [], color="none", marker="s", mfc="white", mec=colour, ms=5, label=f"{text} @ {where} (not the governing one)"))
    z = compress_radius(_t_at(r, m.modulus_freq_hz))
    ax.plot([-1.0, z.real], [0.0, z.imag], color="#00838f", lw=1.2, ls="--", zorder=5)
    entries.append(Line2D([], [], color="#00838f", lw=1.2, ls="--", label=f"min |1+T| = {m.modulus_margin:.3f} @ {eng(m.modulus_freq_hz, 'Hz')}"))
    if len(entries) > _MAX_ENTRIES:
        more = len(entries) - _MAX_ENTRIES + 1
        entries = entries[: _MAX_ENTRIES - 1] + [Line2D([], [], color="none", label=f"... and {more} more (see the report)")]
    return entries


def _verdict(r: LoopResult) -> str:
    n = r.analysis.nyquist
    text = f"N = {n.encirclements}, P = {n.open_loop_rhp_poles}, Z = N + P = {n.closed_loop_rhp_poles}: {'stable' if n.stable else 'UNSTABLE'}"
    if n.origin_poles > 0:
        text += f"\n{origin_phrase(n.origin_poles)}: the closure at infinity is not drawn"
    elif n.origin_poles < 0:
        text += f"\n{origin_phrase(n.origin_poles)}"
    if not n.reliable:
        text += "\ncount doubtful: " + (n.reasons[0] if n.reasons else "see the report")
    return text


def _title(rs: Sequence[LoopResult]) -> str:
    r = rs[0]
    if len(rs) == 1:
        return f"Nyquist: {Path(r.netlist).name}, loop broken at {r.breaks.node}" + (f" [{r.label}]" if r.label else "") + f"\n{verdict_title(r)}"
    return "Nyquist: " + several_title(rs)


def nyquist_figure(results: LoopResult | Iterable[LoopResult]):
    """The Nyquist figure (a matplotlib Figure, not registered with pyplot) of one loop or an overlay of several."""
    from matplotlib.lines import Line2D  # noqa: PLC0415

    rs = as_results(results)
    single = len(rs) == 1
    fig = new_figure(8.0, 9.6)  # a square plot, then the axis note and a legend of up to four rows under it
    ax = fig.subplots()
    curves = [compress_radius(_smooth(r)) for r in rs]
    radius = max(1.25, max(float(np.max(np.abs(z))) for z in curves) * 1.06)
    rmax_true = max(float(np.max(np.abs(r.analysis.t))) for r in rs)

    theta = np.linspace(0, 2 * np.pi, 361)
    drawn = np.concatenate([*curves, *(np.conj(z) for z in curves)])  # both halves: the mirror image is drawn too
    ax.plot(np.cos(theta), np.sin(theta), color="#555555", lw=1.1, ls="-.", zorder=2)
    ang = _clear_angle(drawn, 1.0)
    ax.annotate("|T| = 1 (0 dB)", xy=(math.cos(ang), math.sin(ang)), fontsize=7.5, color="#555555",
                ha="left", va="bottom", xytext=(2, 2), textcoords="offset points")
    decades = min(int(math.ceil(math.log10(rmax_true))) if rmax_true > 1 else 0, _MAX_RINGS)
    every = 1 if decades <= 8 else 2
    for k in range(1, decades + 1):
        rr = 1.0 + DECADE * k
        ax.plot(rr * np.cos(theta), rr * np.sin(theta), color=_RING, lw=0.7, ls=":", zorder=1)
        if k % every:
            continue
        ang = _clear_angle(drawn, rr)
        ax.annotate(_ring_label(k), xy=(rr * math.cos(ang), rr * math.sin(ang)), fontsize=7.5, color="#6d6d6d",
                    ha="left", va="bottom", xytext=(2, 2), textcoords="offset points",
                    bbox={"boxstyle": "round,pad=0.1", "facecolor": "white", "edgecolor": "none", "alpha": 0.7})
    ax.axhline(0.0, color="#bdbdbd", lw=0.8, zorder=1)
    ax.axvline(0.0, color="#bdbdbd", lw=0.8, zorder=1)

    handles = []
    for i, (r, z) in enumerate(zip(rs, curves)):
        colour = CURVE if single else COLOURS[i % len(COLOURS)]
        ax.plot(z.real, z.imag, color=colour, lw=1.7, zorder=3)
        ax.plot(z.real, -z.imag, color=colour, lw=1.1, ls="--", alpha=0.6, zorder=3)
        _arrows(ax, z, colour, radius)
        _arrows(ax, np.conj(z)[::-1], colour, radius, alpha=0.5)
        name = "T(jw), w > 0" if single else f"{loop_name(r, rs)}: {verdict_title(r)}"
        handles.append(Line2D([], [], color=colour, lw=1.7, label=name))
        if not single:
            for c in r.analysis.gain_crossovers:
                ax.plot([math.cos(math.radians(c.phase_deg))], [math.sin(math.radians(c.phase_deg))], "o", color=colour, ms=5, zorder=6)
    handles.append(Line2D([], [], color="#777777", lw=1.1, ls="--", label="mirror image, w < 0"))
    if single:
        handles += _margins(ax, rs[0])
    ax.plot([-1.0], [0.0], "P", color="#c62828", ms=11, mec="white", mew=0.8, zorder=8)
    ax.annotate("-1", xy=(-1.0, 0.0), xytext=(-6, -6), textcoords="offset points", ha="right", va="top", fontsize=10,
                color="#c62828", fontweight="bold", zorder=8)

    ax.set_xlim(-radius, radius)
    ax.set_ylim(-radius, radius)
    ax.set_aspect("equal")
    ax.set_xticks([-1.0, 0.0, 1.0])
    ax.set_yticks([-1.0, 0.0, 1.0])
    ax.tick_params(labelsize=9)
    ax.set_xlabel("Re T   (radius compressed beyond |T| = 1: drawn at 1 + log10|T| / 2, rings give the true |T|)", fontsize=8.5)
    ax.set_ylabel("Im T   (same compressed radius)", fontsize=8.5)
    # "outside": the constrained layout makes room for the legend under the axes (an axes legend anchored
    # below them was cut off by the figure's edge once it grew to three rows)
    fig.legend(handles=handles, fontsize=8, loc="outside lower center", ncols=2, framealpha=0.9)
    if single:
        ax.text(0.015, 0.985, _verdict(rs[0]), transform=ax.transAxes, ha="left", va="top", fontsize=8.5,
                bbox={"boxstyle": "round,pad=0.3", "facecolor": "#f7f7f7", "edgecolor": "#cccccc"}, zorder=9)
    fig.suptitle(_title(rs), fontsize=11)
    return fig


def plot_nyquist(results: LoopResult | Iterable[LoopResult], path: str | Path) -> Path:
    """Write the Nyquist plot of one loop (or an overlay of several) to path; PNG, SVG or PDF by its extension."""
    file_format(path)  # a wrong extension fails before any drawing
    return save(nyquist_figure(results), path, "Nyquist plot")
