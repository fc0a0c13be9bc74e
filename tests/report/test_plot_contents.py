"""What the plots say, read back from matplotlib's own objects: curves, markers, legends, axis ranges, labels and files."""

from __future__ import annotations

import math

import control
import numpy as np
import pytest
from report_loops import FREQ_HZ, W, make_result, two_stage
from test_yield_report import make_run, record

from netloop.jobs.sensitivity.knobs import Knob
from netloop.jobs.sensitivity.records import Sensitivity, SensitivityRun, Slope
from netloop.netlist import SourceLocation
from netloop.report import bode_figure, nyquist_figure
from netloop.report.figure import render, save
from netloop.report.notation import eng
from netloop.report.sensitivity_plot import sensitivity_figure
from netloop.report.yield_plot import histogram_figure, scatter_figure


def _legend(legend) -> list[str]:
    return [t.get_text() for t in legend.get_texts()]


FLOOR = "numerical floor (-120 dB)"


@pytest.mark.parametrize("fixture,kinds,expected", [
    ("stable_result", ["upper"], ["gain crossover, phase margin", "phase crossover, gain margin", FLOOR]),
    ("unstable_result", ["lower"], ["gain crossover, no margin", "phase crossover, |T| > 1 (lower)", FLOOR]),
    ("conditional_result", ["lower", "lower", "upper"], ["gain crossover, phase margin", "phase crossover, gain margin",
                                                        "phase crossover, |T| > 1 (lower)"]),
])
def test_bode_key_names_the_kinds_of_crossover_the_loop_has(request, fixture, kinds, expected):
    """The magnitude plot's key names the curve, each kind of crossover the loop has and no other, and the floor line
    when the curve goes below it."""
    # the kinds, closed forms of the loops in report_loops.py: the two-stage loop is -22.3 dB at -180 deg (python-control's
    # stability_margins: GM 22.28 dB, PM 67.03 deg, tests/report/test_report_plots.py); the three-pole loop of A0 = 1e4 is
    # +10.4 dB there (|T| > 1: a lower crossing) with a negative phase margin (numpy.roots: Z = 2); the conditional loop
    # passes -180 deg at +141 and +47 dB, then at -41 dB; its magnitude axis shows 200 dB below its +160 dB top, short of
    # the -120 dB floor, so no floor line is drawn there
    r = request.getfixturevalue(fixture)
    assert [c.kind for c in r.analysis.phase_crossovers] == kinds
    assert [c.kind == "upper" for c in r.analysis.phase_crossovers] == [c.gain_db < 0 for c in r.analysis.phase_crossovers]
    assert _legend(bode_figure(r).axes[0].get_legend()) == ["T (return ratio)", *expected]


def test_bode_curves_are_the_gain_and_phase_of_t_against_frequency(stable_result):
    """The magnitude curve is 20 log10|T| and the phase curve the continuous phase of T, both against the sample frequencies."""
    # closed form of the two-stage loop: |T| = 1e4 / prod |1 + jf/p|, phase = -sum atan(f/p), p = 1 kHz, 30 MHz, 100 MHz
    fig = bode_figure(stable_result)
    ax_mag, ax_ph = fig.axes
    (mag,) = [ln for ln in ax_mag.lines if ln.get_label() == "T (return ratio)"]
    phase = ax_ph.lines[0]
    closed_db = 20 * np.log10(np.abs(two_stage(FREQ_HZ)))
    closed_deg = -np.degrees(sum(np.arctan(FREQ_HZ / p) for p in (1e3, 3e7, 1e8)))
    for line, want in ((mag, closed_db), (phase, closed_deg)):
        np.testing.assert_allclose(line.get_xdata(), FREQ_HZ)
        np.testing.assert_allclose(line.get_ydata(), want, atol=1e-9)
    assert ax_mag.get_xscale() == ax_ph.get_xscale() == "log"


@pytest.mark.parametrize("fixture,tall,step", [("stable_result", True, 40.0), ("quiet_result", False, 20.0)])
def test_bode_magnitude_ticks_are_decades_of_t_or_every_other_decade_on_a_tall_axis(request, fixture, tall, step):
    """The magnitude axis is ticked every 20 dB (a decade of |T|, common practice) up to a span of 200 dB and every 40 dB
    beyond, so that its labels stay apart: the two-stage loop's axis (80 dB at DC down past the -120 dB floor) is taller
    than 200 dB, the quiet loop's (-20 dB at DC) is not."""
    ax = bode_figure(request.getfixturevalue(fixture)).axes[0]
    lo, hi = ax.get_ylim()
    assert (hi - lo > 200) == tall
    ticks = [t for t in ax.get_yticks() if lo <= t <= hi]
    assert set(np.diff(ticks)) == {step} and 0.0 in ticks


def test_overlay_marks_each_phase_crossover_in_its_own_loops_colour(stable_result, conditional_result):
    """In an overlay of two loops, each phase crossover is a square at (f, odd multiple of -180 deg) on the phase plot in the
    colour of its own loop's curve (the colour is what ties a marker to its loop in the legend)."""
    # the definition of a phase crossover: the phase of T is an odd multiple of 180 deg there (Bode 1945, Network Analysis
    # and Feedback Amplifier Design)
    rs = [stable_result, conditional_result]
    fig = bode_figure(rs)
    ax_mag, ax_ph = fig.axes[:2]
    for i, r in enumerate(rs):
        curve = ax_ph.lines[i].get_color()
        assert fig.legends[0].legend_handles[i].get_color() == curve
        for ax, y in ((ax_ph, "phase_deg"), (ax_mag, "gain_db")):
            squares = [(ln.get_xdata()[0], ln.get_ydata()[0]) for ln in ax.lines if ln.get_marker() == "s" and ln.get_color() == curve]
            assert squares == [(c.freq_hz, getattr(c, y)) for c in r.analysis.phase_crossovers]
        assert all(abs(math.remainder(c.phase_deg + 180.0, 360.0)) < 1e-6 for c in r.analysis.phase_crossovers)


def test_nyquist_legend_gives_the_phase_margin_python_control_finds(stable_result):
    """The single-loop Nyquist legend gives the phase margin and its frequency as python-control finds them, as an arc."""
    s = control.tf("s")
    loop = 1e4 / ((1 + s / (W * 1e3)) * (1 + s / (W * 3e7)) * (1 + s / (W * 1e8)))
    _, pm, _, _, wpc, _ = control.stability_margins(loop)  # python-control 0.10 stability_margins: PM 67.03 deg
    texts = _legend(nyquist_figure(stable_result).legends[0])
    assert f"PM {pm:.2f}° @ {eng(wpc / W, 'Hz')}: arc of |T| = 1 from -1" in texts


def _delayed(f):
    """(invented) A loop of gain 3 with a 1 us delay and a pole at 1 kHz: past the pole its phase is -90 deg - 360 deg f tau,
    an odd multiple of -180 deg at f = (k + 1/4) MHz, so a sweep to 10 MHz has ten phase crossovers."""
    s = 1j * W * np.asarray(f)
    return 3.0 * np.exp(-s * 1e-6) / (1 + s / (W * 1e3))


def test_nyquist_legend_counts_the_margins_it_leaves_out_in_a_row_without_a_symbol():
    """Twelve margin entries (one PM, ten GM, the modulus) overflow the legend: nine are shown and the last row says
    "... and 3 more" with no line or marker beside it (it stands for no drawn item)."""
    from matplotlib.colors import to_rgba  # noqa: PLC0415

    r = make_result(_delayed, freq_hz=np.concatenate([np.logspace(2, 5, 31), np.linspace(1.1e5, 1e7, 100)]))  # 36 deg a step
    crossings = r.analysis.phase_crossovers
    # closed form of the invented loop: phase -atan(f / 1 kHz) - 360 deg f tau = -180 (2k + 1) deg, f near (k + 1/4) MHz
    assert [round(c.freq_hz / 1e4) for c in crossings] == [25 + 100 * k for k in range(10)]
    legend = nyquist_figure(r).legends[0]
    texts = _legend(legend)
    assert len(texts) == 2 + 10 and texts[-1] == "... and 3 more (see the report)"
    assert sum(t.startswith("GM ") for t in texts) == 8  # the governing one and seven others shown
    handle = legend.legend_handles[-1]
    assert to_rgba(handle.get_color())[3] == 0.0 and handle.get_marker() in ("None", "", None)


def test_saved_svg_and_pdf_carry_no_creation_date(tmp_path):
    """The SVG and the PDF hold no creation date, so that the same data gives the same bytes."""
    # matplotlib's Figure.savefig documentation (metadata): "Date" of an SVG (written as <dc:date>) and "CreationDate" of a
    # PDF are default entries, left out when set to None (backend_svg print_svg, backend_pdf PdfPages)
    fig = scatter_figure(make_run([record("tt", 1, "pass", 60.0), record("tt", 2, "fail", 40.0)]))
    svg = render(fig, "svg")
    assert b"dc:date" not in svg
    pdf = save(fig, tmp_path / "scatter.pdf").read_bytes()
    assert pdf.startswith(b"%PDF") and b"/CreationDate" not in pdf


def _knob(name: str) -> Knob:
    return Knob(element=name, parameter="capacitance", device=f"c.{name}", quantity="capacitance", unit="F", token=3,
                location=SourceLocation("amp.cir", 4))


def test_sensitivity_bars_write_the_crossover_slope_in_engineering_notation(stable_result):
    """Each bar's value is written at its end: the crossover frequency's slope in engineering notation (the axis says
    Hz/decade), the margins' slopes with three significant digits, each signed."""
    # engineering notation: SI prefixes in steps of 1e3 (BIPM, The International System of Units, 9th edition 2019, table 7)
    knobs = (Sensitivity(_knob("cc"), 2e-12, pm=Slope(12.3, 0.01), gm=Slope(-4.56, 0.01), fc=Slope(-5.4e7, 1e3), peak=Slope(-0.5, 0.001)),
             Sensitivity(_knob("cl"), 5e-12, pm=Slope(-7.0, 0.01), gm=Slope(1.5, 0.01), fc=Slope(2.5e5, 1e2), peak=Slope(0.25, 0.001)))
    run = SensitivityRun(stable_result, "out", 0.05, "pm", knobs, (), None, 3, 1, 0.1)
    fig = sensitivity_figure(run)
    panels = [(ax.get_xlabel(), [t.get_text().strip() for t in ax.texts]) for ax in fig.axes]  # ranked by pm, then gm, fc, peak
    assert panels == [("deg/decade", ["+12.3", "-7"]), ("dB/decade", ["-4.56", "+1.5"]), ("Hz/decade", ["-54.0 M", "+250 k"]),
                      ("dB/decade", ["-0.5", "+0.25"])]


def test_sensitivity_chart_titles_the_loop_s_margins_and_reads_its_crossover_axis_in_hertz(stable_result):
    """The title gives the measured loop's PM, GM and crossover (python-control 0.10 stability_margins on the two-stage
    loop: 67.03 deg, 22.28 dB, 9.49 MHz); the crossover panel's ticks read in hertz with an SI prefix and its zero as a
    plain "0" (engineering notation, BIPM SI brochure table 7: no prefix for 0)."""
    s = control.tf("s")
    gm, pm, _, _, wgc, _ = control.stability_margins(1e4 / ((1 + s / (W * 1e3)) * (1 + s / (W * 3e7)) * (1 + s / (W * 1e8))))
    knobs = (Sensitivity(_knob("cc"), 2e-12, pm=Slope(12.3, 0.01), gm=Slope(-4.56, 0.01), fc=Slope(-5.4e7, 1e3), peak=Slope(-0.5, 0.001)),)
    fig = sensitivity_figure(SensitivityRun(stable_result, "out", 0.05, "pm", knobs, (), None, 3, 1, 0.1))
    assert f"(PM {pm:.2f}°, GM {20 * math.log10(gm):.2f} dB, fc {eng(wgc / W, 'Hz')})\n" in fig._suptitle.get_text()
    fc_axis = fig.axes[2].xaxis  # ranked by pm: pm, gm, fc, peak
    assert (fc_axis.get_major_formatter()(0.0, 0), fc_axis.get_major_formatter()(-5e7, 1)) == ("0", "-50 MHz")


def test_a_sensitivity_chart_without_slopes_says_so_inside_its_first_panel(stable_result):
    """With no knob to rank, "no slope to show" stands in the middle of the first panel, inside it."""
    fig = sensitivity_figure(SensitivityRun(stable_result, "out", 0.05, "pm", (), (), None, 3, 1, 0.1))
    from matplotlib.backends.backend_agg import FigureCanvasAgg  # the renderer the PNGs come from

    renderer = FigureCanvasAgg(fig).get_renderer()
    fig.draw(renderer)
    (note,) = [t for t in fig.axes[0].texts if t.get_text() == "no slope to show"]
    box, panel = note.get_window_extent(renderer), fig.axes[0].get_window_extent(renderer)
    assert panel.x0 <= box.x0 and box.x1 <= panel.x1 and panel.y0 <= box.y0 and box.y1 <= panel.y1
    assert (box.x0 + box.x1) / 2 == pytest.approx((panel.x0 + panel.x1) / 2, abs=1.0)


def test_histogram_range_leaves_equal_room_either_side_of_the_samples_and_the_requirement():
    """Each histogram's x-range spans the samples and the requirement's threshold with 5 % of their spread on either side."""
    # common practice, and matplotlib's own default (rcParams["axes.xmargin"] = 0.05): data never touches the frame
    pms = (50.0, 44.0, 61.5, 47.0, 58.0)
    recs = [record("tt", s, "pass" if pm >= 45 else "fail", pm, fc=1e6 * s) for s, pm in enumerate(pms, 1)]
    fig = histogram_figure(make_run(recs))
    for ax, values in ((fig.axes[0], [*pms, 45.0]), (fig.axes[2], [1e6 * s for s in range(1, 6)])):
        low, high = min(values), max(values)
        assert ax.get_xlim() == pytest.approx((low - 0.05 * (high - low), high + 0.05 * (high - low)))


def test_scatter_legend_names_each_verdict_and_its_samples():
    """The scatter's legend reads "pass", "fail", "no verdict" (with the corner when there are several), each entry the
    points of the samples with that verdict."""
    # the verdicts of the samples, from the records made here (pm >= 45 passes; a failed self-check has no verdict)
    recs = [record(c, s, outcome, pm, fc=1e6 * s) for c in ("cold", "hot")
            for s, outcome, pm in ((1, "pass", 60.0), (2, "fail", 40.0), (3, "inconclusive", 30.0))]
    for corners, labels in (("", ["pass", "fail", "no verdict"]),
                            ('[axes]\ntemp = [-40, 125]\n', [f"{w}, {c}" for c in ("cold", "hot") for w in ("pass", "fail", "no verdict")])):
        chosen = recs if corners else recs[:3]
        ax = scatter_figure(make_run(chosen, corners=corners)).axes[0]
        assert _legend(ax.get_legend()) == labels
        margins = [r["loop"]["margins"] for r in chosen]
        assert [c.get_offsets().tolist() for c in ax.collections] == [[[m["unity_gain_hz"], m["phase_margin_deg"]]] for m in margins]


def test_nyquist_draws_each_governing_gain_margin_as_a_segment_to_minus_one(conditional_result):
    """On the conditionally stable loop the governing upper and lower gain margins are each a thick segment from where T
    crosses the negative real axis (its compressed radius) to -1, with a filled square there; the crossing that does not
    govern is a hollow square alone; the legend names each with its frequency."""
    from netloop.report.nyquist_plot import compress_radius

    a = conditional_result.analysis
    fig = nyquist_figure(conditional_result)
    on_axis = [ln for ln in fig.axes[0].lines if len(ln.get_ydata()) in (1, 2) and not np.any(np.asarray(ln.get_ydata(), dtype=float))]
    segments = {round(float(ln.get_xdata()[0]), 9) for ln in on_axis if len(ln.get_xdata()) == 2 and ln.get_xdata()[1] == -1.0}
    squares = {round(float(ln.get_xdata()[0]), 9): ln.get_markerfacecolor() for ln in on_axis if ln.get_marker() == "s"}
    governing = {a.margins.phase_crossover_hz, a.margins.lower_phase_crossover_hz}
    texts = _legend(fig.legends[0])
    for c in a.phase_crossovers:
        x = round(-float(compress_radius(10 ** (c.gain_db / 20.0)).real), 9)
        where = eng(c.freq_hz, "Hz")
        if c.freq_hz in governing:
            assert x in segments and squares[x] != "white"
            assert any(t.endswith(f" @ {where}: segment to -1") for t in texts)
        else:
            assert x not in segments and squares[x] == "white"
            assert any(t.endswith(f" @ {where} (not the governing one)") for t in texts)
    assert len(segments) == 2  # the upper and the lower: a conditionally stable loop has both


def test_nyquist_draws_the_modulus_margin_from_minus_one_to_the_nearest_point_of_the_curve(stable_result):
    """The modulus margin's segment runs from -1 to T where |1 + T| is least (module docstring): on the two-stage loop
    0.767 at 20.8 MHz, by a dense grid of the closed form, where |T| = 0.39 (inside the unit disc, drawn to scale)."""
    f = np.logspace(6, 9, 300001)
    t = two_stage(f)
    nearest = t[np.argmin(np.abs(1 + t))]
    ax = nyquist_figure(stable_result).axes[0]
    (segment,) = [ln for ln in ax.lines if len(ln.get_xdata()) == 2 and ln.get_xydata()[0].tolist() == [-1.0, 0.0]]
    end = complex(*segment.get_xydata()[1])
    assert abs(nearest) < 1 and abs(end - nearest) < 2e-3
    assert abs(1 + end) == pytest.approx(abs(1 + nearest), rel=1e-3)


def test_nyquist_box_says_why_the_count_is_doubtful(inconclusive_result):
    """A count the data does not support ends the plot's verdict box with "count doubtful: " and the first reason the
    analysis gives (here the sweep stops at 1 MHz, below the 9.5 MHz crossover: conftest's inconclusive_result)."""
    n = inconclusive_result.analysis.nyquist
    assert not n.reliable and "1e+06 Hz" in n.reasons[0]
    ax = nyquist_figure(inconclusive_result).axes[0]
    (box,) = [t.get_text() for t in ax.texts if t.get_text().startswith("N = ")]
    assert box.splitlines()[-1] == f"count doubtful: {n.reasons[0]}"


def _rings(ax) -> tuple[list[float], list[str]]:
    """The radii of the drawn rings beyond the unit circle, and the texts of their labels."""
    radii = sorted(round(float(np.hypot(ln.get_xdata()[0], ln.get_ydata()[0])), 9) for ln in ax.lines
                   if len(ln.get_xdata()) == 361 and np.ptp(np.hypot(ln.get_xdata(), ln.get_ydata())) < 1e-9)
    labels = [t.get_text() for t in ax.texts if t.get_text().startswith("|T| = ") and t.get_text() != "|T| = 1 (0 dB)"]
    return [r for r in radii if r > 1.0], labels


def test_nyquist_rings_mark_every_decade_and_label_every_other_one_past_eight():
    """A ring for each decade of |T| the loop reaches (module docstring: drawn at 1 + log10|T| / 2); up to eight decades
    each is labelled, beyond that every other one, so that ten labels do not crowd the picture."""
    def huge(f):  # 1e10 / ((1 + jf / 1 Hz)(1 + jf / 1 GHz)): |T| = 7.1e9 at the sweep's 1 Hz, ten decades above 1
        return 1e10 / ((1 + 1j * np.asarray(f)) * (1 + 1j * np.asarray(f) / 1e9))

    radii, labels = _rings(nyquist_figure(make_result(huge)).axes[0])
    assert radii == [pytest.approx(1 + 0.5 * k) for k in range(1, 11)]
    assert labels == ["|T| = 100 (40 dB)", "|T| = 10000 (80 dB)", "|T| = 1e6 (120 dB)", "|T| = 1e8 (160 dB)", "|T| = 1e10 (200 dB)"]
    # the two-stage loop reaches 1e4 (80 dB, report_loops.two_stage): four rings, each labelled
    assert _rings(nyquist_figure(make_result(two_stage)).axes[0])[1] == ["|T| = 10 (20 dB)", "|T| = 100 (40 dB)", "|T| = 1000 (60 dB)",
                                                                          "|T| = 10000 (80 dB)"]


def test_nyquist_arrows_point_the_way_frequency_rises_also_on_a_small_loop(quiet_free_result):
    """T = 0.1 / (1 + s / 1 kHz) stays within 0.1 of the origin and |T| falls as the frequency rises (closed form): the
    arrows of the w > 0 half (below the axis) point towards the origin, those of its mirror image (w < 0, rising to 0)
    away from it (module docstring: arrows in the direction of increasing frequency)."""
    ax = nyquist_figure(quiet_free_result).axes[0]
    arrows = [a for a in ax.texts if getattr(a, "arrow_patch", None) is not None]
    below = [a for a in arrows if a.xy[1] < 0]
    above = [a for a in arrows if a.xy[1] > 0]
    assert below and above
    assert all(abs(complex(*a.xy)) < abs(complex(*a.xyann)) for a in below)
    assert all(abs(complex(*a.xy)) > abs(complex(*a.xyann)) for a in above)
