"""Bode and Nyquist plots: files of the right type, figures not left open, and the margins written on them."""

from __future__ import annotations

import math

import control
import numpy as np
import pytest
from report_loops import W, make_result

from netloop.errors import OutputError
from netloop.report import bode_figure, compress_radius, nyquist_figure, plot_bode, plot_nyquist, write_csv, write_html

PNG = b"\x89PNG\r\n\x1a\n"


def _texts(fig) -> list[str]:
    return [t.get_text() for ax in fig.axes for t in ax.texts]


def test_plots_are_written_as_png_and_svg_and_leave_no_figure_open(tmp_path, stable_result, conditional_result):
    """Each plot writes a PNG (by signature) and an SVG (parsable XML with an svg root), and pyplot holds no figure afterwards."""
    import xml.etree.ElementTree as ET

    import matplotlib.pyplot as plt

    for plot in (plot_bode, plot_nyquist):
        png = plot(stable_result, tmp_path / f"{plot.__name__}.png")
        assert png.read_bytes()[:8] == PNG
        svg = plot([stable_result, conditional_result], tmp_path / f"{plot.__name__}.svg")
        assert ET.parse(svg).getroot().tag.endswith("svg")
    assert plt.get_fignums() == []


def test_bode_plot_labels_the_margins_python_control_finds(stable_result):
    """The Bode plot carries the phase margin and gain margin that python-control computes for the same loop."""
    s = control.tf("s")
    loop = 1e4 / ((1 + s / (W * 1e3)) * (1 + s / (W * 3e7)) * (1 + s / (W * 1e8)))
    gm, pm, _, _, _, _ = control.stability_margins(loop)  # python-control 0.10 stability_margins
    texts = _texts(bode_figure(stable_result))
    assert any(t.startswith(f"PM {pm:.2f}°") for t in texts)  # PM 67.03°
    assert any(t.startswith(f"GM {20 * math.log10(gm):.2f} dB") for t in texts)  # GM 22.28 dB


def test_conditional_loop_shows_lower_margins_and_ignored_crossovers_are_marked(conditional_result):
    """Every phase crossover of the conditionally stable loop gets a label, the lower ones named "lower GM"."""
    texts = _texts(bode_figure(conditional_result))
    lower = [c for c in conditional_result.analysis.phase_crossovers if c.kind == "lower"]
    assert sum(t.startswith("lower GM") for t in texts) == len(lower) == 2
    assert sum(t.startswith("GM ") for t in texts) == 1


def test_ignored_phase_crossover_appears_in_the_legend():
    """A phase crossover below the numerical floor is drawn greyed and counted in the legend, not labelled as a margin."""

    def deep(f):  # -60 dB, double pole at 10 Hz, pole at 1 MHz: the phase passes -180 deg near 5 kHz at about -168 dB
        s = 1j * W * np.asarray(f)
        return 1e-3 / ((1 + s / (W * 10)) ** 2 * (1 + s / (W * 1e6)))

    result = make_result(deep)
    assert len(result.analysis.ignored_phase_crossovers) == 1 and not result.analysis.phase_crossovers
    fig = bode_figure(result)
    legend_texts = [t.get_text() for ax in fig.axes if ax.get_legend() for t in ax.get_legend().get_texts()]
    assert any("below the -120 dB floor (ignored)" in t for t in legend_texts)
    assert not any(t.startswith("GM") for t in _texts(fig))


def test_nyquist_compression_keeps_angles_and_the_unit_disc():
    """The compressed radius is the identity inside |T| <= 1, 1 + log10|T|/2 outside, and never changes the angle."""
    t = np.array([0.5j, -1.0, 10.0 * np.exp(-1j), 1e4 * np.exp(2j)])
    z = compress_radius(t)
    assert np.allclose(np.abs(z), [0.5, 1.0, 1.5, 3.0])
    assert np.allclose(np.angle(z), np.angle(t))


def test_nyquist_plot_states_the_count(unstable_result):
    """The Nyquist plot of the unstable loop states N, P and Z = 2, the count numpy.roots gives for 1 + T."""
    den = np.polymul(np.polymul([1 / (W * 1e3), 1], [1 / (W * 1e6), 1]), [1 / (W * 2e6), 1])
    z = int(np.sum(np.roots(den + np.array([0, 0, 0, 1e4])).real > 0))  # numpy.roots of the characteristic polynomial
    texts = _texts(nyquist_figure(unstable_result))
    assert any(f"Z = N + P = {z}: UNSTABLE" in t for t in texts)


def test_unknown_extension_is_refused(tmp_path, stable_result):
    """A plot path without .png, .svg or .pdf is an OutputError naming the accepted endings, and nothing is written."""
    with pytest.raises(OutputError, match=r"\.png, \.svg, \.pdf"):
        plot_bode(stable_result, tmp_path / "bode.jpeg")
    assert not (tmp_path / "bode.jpeg").exists()


def test_unwritable_paths_are_one_clear_error(tmp_path, stable_result):
    """Writing a plot, the samples or the page into a folder that does not exist is an OutputError naming the file."""
    missing = tmp_path / "no_such_folder"
    for write, name in ((plot_nyquist, "n.png"), (write_csv, "t.csv"), (write_html, "r.html")):
        with pytest.raises(OutputError, match=rf"cannot write the .* to '.*{name}'"):
            write(stable_result, missing / name)
    assert not missing.exists()


def test_every_label_and_legend_lies_inside_the_figure_without_overlap(stable_result, conditional_result):
    """Drawn on matplotlib's own renderer, each figure's legend, titles and axis labels lie inside the figure, and the
    Nyquist legend (up to four rows for a conditionally stable loop) overlaps neither the axes nor their label."""
    for result in (stable_result, conditional_result, [stable_result, conditional_result]):
        for make in (bode_figure, nyquist_figure):
            fig = make(result)
            from matplotlib.backends.backend_agg import FigureCanvasAgg  # noqa: PLC0415 - the renderer the PNGs come from

            renderer = FigureCanvasAgg(fig).get_renderer()
            fig.draw(renderer)
            box = fig.bbox
            legends = [*fig.legends, *(ax.get_legend() for ax in fig.axes if ax.get_legend() is not None)]
            labels = [ax.xaxis.label for ax in fig.axes if ax.get_xlabel()]
            for artist in (*legends, *labels, fig._suptitle):
                extent = artist.get_window_extent(renderer)
                assert box.x0 - 1 <= extent.x0 and extent.x1 <= box.x1 + 1 and box.y0 - 1 <= extent.y0 and extent.y1 <= box.y1 + 1, (
                    make.__name__, artist)
            if make is nyquist_figure:
                (legend,) = fig.legends
                extent = legend.get_window_extent(renderer)
                for other in (fig.axes[0].get_window_extent(renderer), fig.axes[0].xaxis.label.get_window_extent(renderer)):
                    assert not extent.overlaps(other), make.__name__


def _eight_pole(f):
    """The marginal three-pole loop with eight more poles at 30 MHz: its phase crosses -180 deg at 1.05 MHz (GM 4.73 dB,
    governing) and -540 deg at 20.8 MHz, 86.8 dB below 0 dB (a crossing that governs nothing)."""
    s = 1j * W * np.asarray(f)
    return 1e3 / ((1 + s / (W * 1e3)) * (1 + s / (W * 1e6)) * (1 + s / (W * 2e6)) * (1 + s / (W * 3e7)) ** 8)


def test_the_governing_gain_margin_gets_the_biggest_mark_on_both_plots():
    """Issue 15.16: on the Bode plot the governing gain margin (4.73 dB at the closed form's -180 deg) has the thickest arrow and the
    -540 deg crossing a thin, faint one; on the Nyquist plot only the governing one is a segment to -1 (two segments of
    one colour overlapped there), the other a hollow point."""
    from matplotlib.text import Annotation

    from netloop.report.bode_plot import GM_UPPER

    from scipy.optimize import brentq

    def phase(f):  # the closed form's phase in degrees, a sum of pole angles
        return -math.degrees(sum(math.atan(f / p) for p in (1e3, 1e6, 2e6, *[3e7] * 8)))

    f_pc = brentq(lambda f: phase(f) + 180.0, 1e5, 1e7, xtol=1e-6)  # closed form, scipy.optimize.brentq
    gm_db = -20 * math.log10(abs(_eight_pole(f_pc)))
    r = make_result(_eight_pole, freq_hz=np.logspace(0, 10, 401))
    crossings = r.analysis.phase_crossovers
    assert [round(c.phase_deg) for c in crossings] == [-180, -540]
    assert r.analysis.margins.gain_margin_db == pytest.approx(gm_db, abs=0.01)
    fig = bode_figure(r)
    arrows = {round(t.xy[0]): t.arrow_patch for t in fig.axes[0].texts
              if isinstance(t, Annotation) and t.arrow_patch is not None and not t.get_text()}  # the margin arrows, not the labels
    governing, other = arrows[round(crossings[0].freq_hz)], arrows[round(crossings[1].freq_hz)]
    assert crossings[0].freq_hz == pytest.approx(f_pc, rel=1e-4)
    assert governing.get_linewidth() > 2 * other.get_linewidth() and other.get_alpha() < 1.0
    nyq = nyquist_figure(r)
    segments = [ln for ln in nyq.axes[0].lines if ln.get_color() == GM_UPPER and ln.get_linewidth() == 3.0]
    assert len(segments) == 1 and segments[0].get_xdata()[1] == -1.0
    hollow = [ln for ln in nyq.axes[0].lines if ln.get_markeredgecolor() == GM_UPPER and ln.get_markerfacecolor() == "white"]
    assert len(hollow) == 1


def test_ring_labels_stand_clear_of_the_curve_and_its_mirror_image(stable_result):
    """Issue 15.16: each |T| ring's label sits where neither T(jw) nor its mirror image passes near its anchor (at least
    0.15 of the unit circle's radius away in the compressed plot; common practice: a label never sits on a curve)."""
    from matplotlib.text import Annotation

    from netloop.report import compress_radius

    def through_a_label(f):  # its mirror image passes +62 deg at |T| = 100: 213 / |1 + j tan 62deg| = 100 (closed form)
        s = 1j * W * np.asarray(f)
        return 213.0 / ((1 + s / (W * 1e3)) * (1 + s / (W * 1e9)))

    for r in (stable_result, make_result(_eight_pole, freq_hz=np.logspace(0, 10, 401)), make_result(through_a_label)):
        fig = nyquist_figure(r)
        z = compress_radius(np.asarray(r.analysis.t))
        drawn = np.concatenate([z, np.conj(z)])
        rings = [t for t in fig.axes[0].texts if isinstance(t, Annotation) and (t.get_text().startswith("|T| =") or "dB" in t.get_text())
                 and t.arrow_patch is None and t.get_text() != "-1"]
        assert rings
        for t in rings:
            anchor = complex(*t.xy)
            assert float(np.min(np.abs(drawn - anchor))) >= 0.15, (t.get_text(), anchor)
