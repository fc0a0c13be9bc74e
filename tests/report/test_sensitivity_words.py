"""A sensitivity run in words: the signed slopes of the table, the reading line, the what-ifs and their fresh checks,
in the terminal and on the page (records built from a closed-form loop, no ngspice)."""

from __future__ import annotations

import math
import re
from dataclasses import replace

import control
import numpy as np
import pytest
from report_loops import W, make_result

from netloop.jobs.sensitivity.knobs import Knob
from netloop.jobs.sensitivity.records import FIGURES, Sensitivity, SensitivityRun, Slope, WhatIf, central_difference
from netloop.netlist.location import SourceLocation
from netloop.report.notation import eng
from netloop.report.sensitivity_html import sensitivity_section
from netloop.report.sensitivity_text import format_sensitivity_text, slope_text, what_if_line

STEP = 0.05
CIRCUIT = "circuits/miller_ota.cir"  # (invented)
REQ_PM = 75.0


def _tf(cc=1.0, cl=1.0, w=1.0):
    """The invented Miller-compensated two-stage loop, its values scaled: A0 = 1e4, p1 = 1 kHz / cc, p2 = 30 MHz sqrt(w) / cl,
    p3 = 100 MHz (Gray, Hurst, Lewis and Meyer, Analysis and Design of Analog Integrated Circuits, 5th ed., sec. 9.4:
    the dominant pole falls as 1/Cc, the second pole is gm6/CL, and gm6 grows as the square root of the width)."""
    s = control.tf("s")
    return 1e4 / ((1 + s / (W * 1e3 / cc)) * (1 + s / (W * 3e7 * math.sqrt(w) / cl)) * (1 + s / (W * 1e8)))


def miller(f, **scale):
    """T(j 2 pi f) of the scaled loop (_tf)."""
    return np.asarray(_tf(**scale)(1j * W * np.asarray(f)), dtype=complex)


def _figures(**scale) -> dict[str, float]:
    """Phase margin, gain margin, crossover and peaking of the scaled loop (python-control 0.10 stability_margins; the
    peaking is the largest |T/(1+T)| over its low-frequency value, on a dense grid)."""
    gm, pm, _, _, wgc, _ = control.stability_margins(_tf(**scale))
    f = np.logspace(0, 10, 4001)
    t = miller(f, **scale)
    closed = 20 * np.log10(np.abs(t / (1 + t)))
    return {"pm": pm, "gm": 20 * math.log10(gm), "fc": wgc / W, "peak": float(closed.max() - closed[0])}


def _knob(element: str, parameter: str, quantity: str, unit: str, line: int, reload: str = "") -> Knob:
    return Knob(element, parameter, element, quantity, unit, 3, SourceLocation(CIRCUIT, line), reload)


KNOBS = {
    "cc": (_knob("cc", "capacitance", "capacitance", "F", 7), 2e-12),
    "cl": (_knob("cl", "capacitance", "capacitance", "F", 8), 5e-12),
    "w": (_knob("xdrv", "w", "width", "m", 12, reload="a size of a process device wrapper (invented)"), 20e-6),
}


def _sensitivity(name: str) -> Sensitivity:
    """The knob's slopes by central differences of the closed form's figures at x e^(k h), k in +-1, +-2."""
    knob, value = KNOBS[name]
    at = {k: _figures(**{name: math.exp(k * STEP)}) for k in (1, -1, 2, -2)}
    slopes = {f: central_difference({k: at[k][f] for k in at}, STEP) for f in FIGURES}
    return Sensitivity(knob, value, **slopes)


def _what_ifs() -> tuple[WhatIf, WhatIf]:
    """pm>=75 solved with cc (half a degree above the boundary, python-control via scipy brentq) and checked afresh;
    gm>=40 by cl alone, unreachable between 0.1x and 10x (the best, 32.04 dB, is at 0.1x)."""
    from scipy.optimize import brentq

    factor = brentq(lambda x: _figures(cc=x)["pm"] - (REQ_PM + 0.5), 1.0, 3.0)
    cc, v_cc = KNOBS["cc"]
    check = make_result(lambda f: miller(f, cc=factor), netlist=CIRCUIT, requirements=(f"pm>={REQ_PM:g}",), label=f"cc = {v_cc * factor:.6g}")
    solved = WhatIf(cc, f"pm>={REQ_PM:g}", v_cc, v_cc * factor, factor, (0.1, 10.0), False, True, (), check,
                    f"Cc n1 out {v_cc * factor:.6g}", "")
    cl, v_cl = KNOBS["cl"]
    best = _figures(cl=0.1)["gm"]
    answer = f"gm>=40 cannot be reached by cl alone between 0.1x and 10x: the best is {best:.4g} dB at 0.1x"
    unreachable = WhatIf(cl, "gm>=40", v_cl, None, None, (0.1, 10.0), False, True, ((0.1, best), (10.0, _figures(cl=10.0)["gm"])),
                         None, None, answer)
    return solved, unreachable


@pytest.fixture(scope="module")
def run() -> SensitivityRun:
    """The three knobs of the invented Miller OTA ranked by phase margin, with both what-ifs."""
    ranked = sorted((_sensitivity(n) for n in KNOBS), key=lambda s: -abs(s.pm.per_decade))
    return SensitivityRun(make_result(miller, netlist=CIRCUIT), "out", STEP, "pm", tuple(ranked), _what_ifs(), None, 3, 1, 0.5)


def _row(text: str, knob: str) -> list[str]:
    line = next(ln for ln in text.splitlines() if re.match(rf"\s*\d+\s+{re.escape(knob)}\s", ln))
    return re.split(r"\s{2,}", line.strip())


def test_the_table_signs_each_slope_as_the_figure_moves(run):
    """A larger Miller capacitor raises the phase margin (a "+" slope) and a larger load lowers it (a "-" slope, never
    "+-"); the table prints each slope with its own sign, and the reading line turns the top one into +1 % of the knob."""
    text = format_sensitivity_text(run)
    by_name = {s.knob.name: s for s in run.sensitivities}
    # Gray, Hurst, Lewis and Meyer, sec. 9.4: Cc splits the poles (PM up), CL pulls the second pole down (PM down)
    assert by_name["cc"].pm.per_decade > 0 > by_name["cl"].pm.per_decade
    for name, s in by_name.items():
        cells = _row(text, name)
        pm, gm = cells[3], cells[4]
        assert pm == f"{s.pm.per_decade:+.2f}" and gm == f"{s.gm.per_decade:+.2f}", cells
    top = run.sensitivities[0]
    per = top.pm.per_decade * math.log10(1.01)  # d PM / d log10 x times log10(1.01): the change for +1 % of the value
    assert (f"reading: {top.knob.name} {top.pm.per_decade:+.2f} deg/decade is {per:+.3g} deg of phase margin for +1 % of "
            f"{top.knob.name}") in text


@pytest.mark.parametrize(("figure", "per_decade", "shown"), [
    ("pm", 69.454, "+69.45"), ("pm", -7.5432, "-7.54"), ("gm", -0.004321, "-0.0043"), ("gm", 0.0, "+0.00"),
    ("fc", -7.54e6, "-7.54 MHz"), ("fc", 1.2e3, "+1.20 kHz"), ("peak", None, "-"),
])
def test_slope_text_carries_one_sign(figure, per_decade, shown):
    """A slope reads with exactly one sign, "-" when it falls and "+" otherwise (common practice for signed changes),
    in its figure's unit; a slope that does not exist is "-"."""
    assert slope_text(figure, Slope(per_decade, None if per_decade is None else 0.0)) == shown


def test_a_run_where_no_knob_has_a_slope_still_reads(run):
    """When every knob's simulation failed, the table names each failure and no reading line is given (there is no top
    slope to read), and the summary still ends with the cautions."""
    failed = tuple(replace(s, pm=Slope(None, None), gm=Slope(None, None), fc=Slope(None, None), peak=Slope(None, None),
                           problem="simulation failed") for s in run.sensitivities)
    text = format_sensitivity_text(replace(run, sensitivities=failed, what_ifs=()))
    assert "reading:" not in text
    assert all(_row(text, s.knob.name)[3] == "(simulation failed)" for s in failed)
    assert text.endswith(f"caution: {run.nominal.caution}\n")


def test_a_solved_what_if_gives_its_fresh_check_in_the_terminal(run):
    """The what-if solved with cc gives the loop measured afresh at that value: its phase margin and crossover (python-control
    on the closed form at the solved cc), then whether the requirement is met there."""
    solved = run.what_ifs[0]
    gm, pm, _, _, wgc, _ = control.stability_margins(_tf(cc=solved.factor))  # python-control 0.10
    lines = what_if_line(solved)
    assert lines[1].strip().startswith(f"measured afresh with it: PM {pm:.2f} deg at {eng(wgc / W, 'Hz')}, GM {20 * math.log10(gm):.2f} dB")
    assert lines[1].endswith(f"; worst phase margin {pm:.2f} deg: meets pm>=75")
    assert lines[2] == f"  {'':<10} card: {solved.edited}   ({CIRCUIT}:7)"


def test_the_page_gives_each_what_if_its_check_or_why_none(run):
    """On the page, the solved what-if shows the fresh check's margins and "meets it" (ok); the unreachable one shows the
    job's answer and "not reachable" (bad); the intro names the knob whose changes were edited copies of the netlist."""
    from html import unescape

    page = unescape(sensitivity_section(run))
    solved, unreachable = run.what_ifs
    gm, pm, _, _, wgc, _ = control.stability_margins(_tf(cc=solved.factor))  # python-control 0.10
    rows = re.findall(r"<tr><td><code>([^<]*)</code></td><td>([^<]*)</td>(?:<td[^>]*>[^<]*</td>){2}<td>([^<]*)</td>"
                      r"<td class=\"([^\"]*)\">([^<]*)</td></tr>", page)
    assert [(r[0], r[1], r[3], r[4]) for r in rows] == [("pm>=75", "cc", "ok", "meets it"), ("gm>=40", "cl", "bad", "not reachable")]
    assert rows[0][2].startswith(f"PM {pm:.2f} deg at {eng(wgc / W, 'Hz')}, GM {20 * math.log10(gm):.2f} dB, peaking ")
    assert rows[1][2] == unreachable.answer
    assert "1 of them (xdrv:w) is a size of a process device wrapper: ngspice applies it when it reads the instance" in page


def test_the_summary_words_each_slope_s_error_the_reloads_and_what_a_what_if_needs(run):
    """The accuracy line gives the largest estimated error of the slopes shown and names only those above 1 % (the
    steps h and 2h, netloop.jobs.sensitivity.records.central_difference); the reload line says how the wrapper's size was
    changed; a solved what-if says what it needs; the numbers of the table stand right-aligned under their units."""
    from netloop.report.sensitivity_text import LESS_SURE, accuracy_text

    text = format_sensitivity_text(run)
    errors = {(s.knob.name, f): s.slope(f).relative_error for s in run.sensitivities for f in FIGURES}
    worst = max(e for e in errors.values() if e is not None and math.isfinite(e))
    unsure = [(k, f) for (k, f), e in errors.items() if e is not None and e > LESS_SURE]
    assert unsure == [("cl", "peak"), ("xdrv:w", "peak")]  # the peaking barely moves: its slopes are differences of near-equal values
    assert accuracy_text(run) == (f"estimated error of each slope: at most {100 * worst:.2g} % of it (from the steps h and 2h); less "
                                  f"sure (above 1 %): cl peaking ({100 * errors['cl', 'peak']:.2g} %), xdrv:w peaking "
                                  f"({100 * errors['xdrv:w', 'peak']:.2g} %)")
    assert "so each was an edited copy of the netlist read again by ngspice (its first value a load, the others changed in the copy ngspice held)" in text
    solved = run.what_ifs[0]
    assert what_if_line(solved)[0] == (f"  pm>=75     cc: needs {eng(solved.value, 'F')} -> {eng(solved.solved_value, 'F')} "
                                       f"(x{solved.factor:.6g})")
    lines = text.splitlines()
    units = next(line for line in lines if "deg/decade" in line)
    right = units.index("deg/decade") + len("deg/decade")
    for name in ("cc", "cl", "xdrv:w"):
        row = next(line for line in lines if re.match(rf"\s+\d+\s+{re.escape(name)}\s", line))
        cell = f"{next(s for s in run.sensitivities if s.knob.name == name).pm.per_decade:+.2f}"
        assert row.index(cell) + len(cell) == right, row


@pytest.mark.parametrize(("figure", "slope", "colour"), [("pm", 0.5, "HELPS"), ("pm", -0.5, "HURTS"), ("gm", 3.0, "HELPS"),
                                                         ("peak", 0.2, "HURTS"), ("peak", -0.2, "HELPS"), ("fc", 5.0, "NEUTRAL"),
                                                         ("pm", 0.0, "NEUTRAL")])
def test_a_bar_is_coloured_by_whether_its_slope_helps_the_figure(figure, slope, colour):
    """A bar helps when the figure moves the way it is better (margins up, peaking down), hurts the other way, and is
    neutral for the crossover (neither way is better by itself) or a slope of 0, however small the slope."""
    from netloop.report import sensitivity_plot

    assert sensitivity_plot._colour(figure, slope) == getattr(sensitivity_plot, colour)


def test_the_page_gives_a_solved_what_if_its_edited_card(run):
    """The page shows the card as written into the netlist's copy for the solved what-if."""
    from html import unescape

    assert run.what_ifs[0].edited in unescape(sensitivity_section(run))


def test_the_largest_slope_error_is_given_as_a_percentage_of_its_slope(run):
    """With every slope's estimated error 0.95 % of it, the accuracy line says "at most 0.95 %" and names none as less
    sure (1 % is the line)."""
    from netloop.report.sensitivity_text import accuracy_text

    def sure(s):  # each slope 2.0 per decade with an estimated error of 0.019
        return replace(s, **{f: Slope(2.0, 0.019) for f in FIGURES})

    same = replace(run, sensitivities=tuple(sure(s) for s in run.sensitivities))
    assert accuracy_text(same) == "estimated error of each slope: at most 0.95 % of it (from the steps h and 2h)"


def test_the_table_gives_each_what_if_in_its_knob_s_row(run):
    """A column per what-if requirement: in cc's row the value solved for pm>=75 with its factor (the brentq root of the
    closed form, _what_ifs), in cl's row "none in range" for gm>=40; a knob no what-if was asked of has the cell empty."""
    lines = format_sensitivity_text(run).splitlines()
    head = next(line for line in lines if line.startswith("rank  knob"))
    pm_at, gm_at = head.index("what-if pm>=75"), head.index("what-if gm>=40")
    solved = run.what_ifs[0]

    def cells(knob):
        row = next(line for line in lines if re.match(rf"\s*\d+\s+{re.escape(knob)}\s", line)).ljust(len(head))
        return row[pm_at:gm_at].strip(), row[gm_at:].strip()

    assert cells("cc") == (f"{eng(2e-12 * solved.factor, 'F')} (x{solved.factor:.4g})", "")
    assert cells("cl") == ("", "none in range")
    assert cells("xdrv:w") == ("", "")
