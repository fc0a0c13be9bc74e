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
