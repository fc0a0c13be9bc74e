"""The terminal summary: verdict first, the worst margins and every crossover, nothing hidden."""

from __future__ import annotations

import math
import re

import control
import numpy as np
import pytest
from report_loops import W, make_result, two_stage

from netloop.report import format_text


def test_summary_shows_worst_margins_as_python_control_finds_them(stable_result):
    """The summary's first line says PASS and stable, and it prints PM and GM equal to python-control's to 2 decimals."""
    s = control.tf("s")
    loop = 1e4 / ((1 + s / (W * 1e3)) * (1 + s / (W * 3e7)) * (1 + s / (W * 1e8)))
    gm, pm, _, _, w_gc, _ = control.stability_margins(loop)  # python-control 0.10 stability_margins
    text = format_text(stable_result)
    first = text.splitlines()[0]
    assert first == (f"PASS  stable: worst phase margin {pm:.2f} deg at {w_gc / W / 1e6:.2f} MHz, gain margin "
                     f"{20 * math.log10(gm):.2f} dB; all 2 requirement(s) met")
    row = next(line for line in text.splitlines() if " down " in line)
    assert row.startswith(f"     {w_gc / W / 1e6:.2f} MHz  down  phase ")
    assert f"{pm:.2f} deg" in text  # 67.03
    assert f"{20 * math.log10(gm):.2f} dB" in text  # 22.28
    assert f"{w_gc / W / 1e6:.2f} MHz" in text  # 9.49 MHz
    assert text.rstrip().splitlines()[-1].startswith("caution:")
    assert ".tran 1n 1u" in text and "PASS  pm>=60" in text


def test_unstable_loop_says_fail_first(unstable_result):
    """An unstable loop's summary starts with FAIL and unstable, gives the RHP count and the failed requirement."""
    text = format_text(unstable_result)
    first = text.splitlines()[0]
    assert first.startswith("FAIL") and "unstable" in first and "pm>=45" in first
    assert "Z = N + P = 2" in text
    assert "FAIL  pm>=45" in text


def test_conditionally_stable_loop_lists_lower_gain_margin(conditional_result):
    """A conditionally stable loop lists every phase crossover and its lower gain margin."""
    a = conditional_result.analysis
    text = format_text(conditional_result)
    assert text.count(" lower |T|") == sum(c.kind == "lower" for c in a.phase_crossovers) == 2
    assert re.search(rf"^lower gain margin +{a.margins.lower_gain_margin_db:.2f} dB at 971 Hz", text, re.M)


def test_no_crossover_is_stated_not_hidden(quiet_result):
    """A loop that never reaches 0 dB says so, and names no phase margin figure."""
    text = format_text(quiet_result)
    assert "does not regulate" in text.splitlines()[0]
    assert "gain crossovers (|T| = 0 dB): none in the sweep" in text.splitlines()
    assert "phase crossovers (phase = odd multiple of 180 deg): none above the floor" in text.splitlines()
    assert text.isascii()


def test_a_loop_that_does_not_regulate_passes_and_says_what_to_do(quiet_free_result):
    """Without requirements a stable loop that never reaches 0 dB is PASS (the project's decision), and the verdict line
    says plainly that it does not regulate, its largest |T| (0.1 = -20 dB, the analytic loop's DC gain) and the
    requirement that makes it a failure."""
    first = format_text(quiet_free_result).splitlines()[0]
    assert first.startswith("PASS  stable but does not regulate")
    assert "at most -20.00 dB" in first and "--require 'dc>=40'" in first and "below common practice" not in first


def test_margins_below_common_practice_are_said_beside_pass(marginal_result, stable_result):
    """Without requirements, a stable loop with PM 32.69 deg and GM 9.56 dB (python-control's stability_margins on the
    same T(s)) keeps PASS, and the verdict line says which common-practice rules it misses; a loop with requirements,
    or one within common practice, gets no such note."""
    s = control.tf("s")
    gm, pm, _, _, _, _ = control.stability_margins(1e3 / ((1 + s / (W * 1e3)) * (1 + s / (W * 1e6)) * (1 + s / (W * 2e6))))
    first = format_text(marginal_result).splitlines()[0]
    assert first.startswith("PASS  stable")
    note = first.split("; below common practice", 1)[1]
    assert "PM 45-60 deg, GM 10 dB, peaking under 3 dB" in note  # common practice, no source
    assert f"worst phase margin {pm:.2f} deg" in note and f"upper gain margin {20 * math.log10(gm):.2f} dB" in note
    assert "common practice" not in format_text(stable_result)
    assert make_result(two_stage).below_common_practice == ()  # 67 deg, 22 dB, no peaking: within common practice


def test_inconclusive_loop_never_says_pass(inconclusive_result):
    """A loop whose sweep ends before its crossover starts with INCONCLUSIVE, names the failed check and what to try,
    and prints neither PASS nor unstable."""
    text = format_text(inconclusive_result)
    first = text.splitlines()[0]
    assert first.startswith("INCONCLUSIVE  the data supports no verdict: the sweep ends at 1e+06 Hz with |T| still ")
    assert "try: let the sweep run higher" in first and "; try: " in first and "None" not in first and "more check" not in first  # one check failed
    assert "PASS" not in text and "unstable" not in text.lower()
    doubtful = make_result(two_stage, requirements=("dc>=40",), freq_hz=inconclusive_result.analysis.freq_hz)
    assert "  NO VERDICT  dc>=40: DC loop gain = 80.00 dB" in format_text(doubtful)  # 1e4: 80 dB by the formula


def test_colour_only_paints_the_verdicts(unstable_result):
    """With colour the summary differs from the plain one only by ANSI codes around PASS and FAIL."""
    plain = format_text(unstable_result)
    painted = format_text(unstable_result, colour=True)
    assert painted.startswith("\x1b[1;31mFAIL\x1b[0m")
    assert "  \x1b[1;31mFAIL\x1b[0m  pm>=45" in painted
    assert re.sub(r"\x1b\[[0-9;]*m", "", painted) == plain
    assert "\x1b" not in plain


def test_a_sweep_started_above_the_first_pole_labels_the_gain_at_its_lowest_frequency():
    """Sweeping the two-stage loop from 1 MHz (issue 15.5) reads |T(1 MHz)|, which is not the DC loop gain: the label
    says so and names the frequency, and the figure is the closed form's |T(j 2 pi 1 MHz)|; from 1 Hz up, T is flat at
    the bottom and the row reads DC loop gain, 80 dB (the closed form's A0 = 1e4)."""
    above = make_result(two_stage, freq_hz=np.logspace(6, 10, 81))
    row = next(line for line in format_text(above).splitlines() if line.startswith("|T| at the lowest frequency"))
    expected = 20 * math.log10(abs(two_stage(1e6)))  # closed form: 1e4 / |(1 + 1000j)(1 + j/30)(1 + j/100)|
    assert f"{expected:.2f} dB at 1.00 MHz (not the DC loop gain" in row
    assert "DC loop gain  " not in format_text(above)
    full = format_text(make_result(two_stage))
    assert re.search(r"^DC loop gain +80\.00 dB$", full, re.M)


def test_an_ac_coupled_loop_swept_above_its_low_crossover_warns_that_it_is_missed():
    """An AC-coupled loop (a zero at s = 0 and a pole at 10 Hz before a gain of 1e3, closed form) swept from 100 Hz leads
    there by atan(10/100) = 5.7 deg with |T| = 60 dB: the summary warns that the low gain crossover (at 0.01 Hz by the
    closed form) lies below the sweep and does not call 60 dB the DC loop gain; the two-stage loop swept alike does not."""
    def coupled(f):
        s = 1j * W * np.asarray(f)
        return 1e3 * (s / (W * 10)) / (1 + s / (W * 10)) / ((1 + s / (W * 1e6)) * (1 + s / (W * 1e8)))

    text = format_text(make_result(coupled, freq_hz=np.logspace(2, 10, 161)))
    lead = math.degrees(math.atan(10 / 100))  # closed form: the coupling's phase lead at 100 Hz
    assert f"its phase leads by {lead:.2g} deg: T falls toward DC (AC coupling), and its low gain crossover" in text
    assert "|T| at the lowest frequency" in text and "DC loop gain  " not in text
    settled = format_text(make_result(two_stage, freq_hz=np.logspace(2, 10, 161)))
    assert "AC coupling" not in settled


def _poly(*factors):
    """The polynomial in s (numpy.polyval order) of a product of (1 + s / (2 pi f)) factors."""
    out = np.array([1.0])
    for f in factors:
        out = np.polymul(out, [1.0 / (W * f), 1.0])
    return out


def _least_damped_upper(roots):
    """The upper member of the least-damped complex pair among closed-form roots (rad/s)."""
    return min((r for r in roots if r.imag > 0), key=lambda r: -r.real / abs(r))


def test_closed_loop_rows_lead_with_measured_figures_and_say_why_the_pair_differs():
    """A loop with a zero near its crossover (issue 15.6): the measured peaking and |T/(1+T)| come first, then the poles
    fitted to the measured 1/(1+T), whose dominant pair matches the closed form's roots (numpy.roots of D + A N); no
    estimate from the phase margin is shown beside them, and since that pair alone would peak 1/(2 z sqrt(1 - z^2))
    (Ogata, Modern Control Engineering) and not what was measured, a row says why."""
    def zero_near(f):
        s = 1j * W * np.asarray(f)
        return 1e4 * (1 + s / (W * 2e6)) / ((1 + s / (W * 1e3)) * (1 + s / (W * 5e5)) * (1 + s / (W * 1e7)) ** 2)

    r = make_result(zero_near)
    text = format_text(r)
    labels = [line[:30].strip() for line in text.splitlines()]
    assert labels.index("closed-loop peaking") < labels.index("|T/(1+T)| at worst crossover") < labels.index("closed-loop poles")
    assert "ESTIMATE" not in text
    char = np.polyadd(_poly(1e3, 5e5, 1e7, 1e7), 1e4 * _poly(2e6))  # closed form: 1 + T = 0
    pair = _least_damped_upper(np.roots(char))
    z = -pair.real / abs(pair)
    assert r.analysis.poles.dominant_damping == pytest.approx(z, rel=1e-6)
    alone = -20 * math.log10(2 * z * math.sqrt(1 - z * z))  # 2.40 dB, measured 4.94 dB
    assert f"why these differ              the dominant pair alone would peak {alone:.2f} dB; the measured peaking is" in text
    assert abs(alone - r.analysis.peaking.peak_db) > 1.0


def test_a_loop_with_no_fit_shows_the_estimate_and_says_why():
    """Only where no poles were fitted does the second-order estimate from the phase margin appear, saying it stands in
    for a fit (its damping the textbook's for PM 67 deg: z = tan(PM) sqrt(cos PM) / 2, Ogata)."""
    from dataclasses import replace

    r = make_result(two_stage)
    unfitted = replace(r, analysis=replace(r.analysis, poles=None))
    text = " ".join(format_text(unfitted).split())  # wrapped rows read as one
    pm = math.radians(r.analysis.margins.phase_margin_deg)
    z = math.tan(pm) * math.sqrt(math.cos(pm)) / 2
    assert re.search(rf"2nd-order ESTIMATE damping {z:.3f}, .*\(from PM alone, as if the loop had two poles: no poles were fitted\)", text)
    assert "ESTIMATE" not in format_text(r)


def test_check_and_compare_name_the_same_dominant_pole():
    """One definition (netloop.analysis.poles.dominant_pole): a faint high-Q resonance (weight 1e-3 of the loop's own
    pair) beside the two-stage loop is passed over by check's figures and by compare alike, both naming the closed
    form's own pair of 1 + T (numpy.roots), not the 2 MHz resonance that is the least damped of all fitted poles."""
    from netloop.jobs.compare_explain import dominant_pole

    def faint(f):
        s = 1j * W * np.asarray(f)
        x = s / (W * 2e6)
        return two_stage(f) * (1 + 1e-3 * x / (1 + 0.02 * x + x * x))

    r = make_result(faint, freq_hz=np.logspace(0, 10, 401))
    poles = r.analysis.poles
    least = min((p for p in poles.poles_rad_s if p.imag > 0), key=lambda p: -p.real / abs(p))
    assert abs(least) / W == pytest.approx(2e6, rel=1e-2)  # the faint resonance is among the fitted poles
    pair = _least_damped_upper(np.roots(np.polyadd(_poly(1e3, 3e7, 1e8), [1e4])))  # closed form of two_stage alone
    assert poles.dominant_freq_hz * W == pytest.approx(abs(pair), rel=1e-3)
    assert poles.dominant_damping == pytest.approx(-pair.real / abs(pair), rel=1e-3)
    assert dominant_pole(r) == pytest.approx(pair, rel=1e-3)


def test_a_crossover_row_names_the_closed_loop_gain_it_shows():
    """The figure on a gain-crossover row is |T/(1+T)| there (issue 15.14), -3.0 dB for the two-stage loop's PM of 67 deg
    by the closed form |1 / (1 + e^{-j(180 - PM)})| at |T| = 1; the row names it so and never calls it peaking."""
    text = format_text(make_result(two_stage))
    row = next(line for line in text.splitlines() if " down " in line and "PM" in line)
    pm = math.radians(make_result(two_stage).analysis.margins.phase_margin_deg)
    expected = 20 * math.log10(1 / abs(1 + complex(math.cos(math.pi - pm), -math.sin(math.pi - pm))))
    assert re.search(rf"\|T/\(1\+T\)\| +{expected:.2f} dB", row)
    assert "peaking" not in row


@pytest.mark.parametrize("count", [4, 7])
def test_ignored_statements_beyond_those_shown_are_counted(count):
    """The summary shows the first three ignored statements and counts the rest: "... and N - 3 more"."""
    ignored = tuple(f"circuits/front_end.cir:{i}: .tran 1n 1u" for i in range(count))
    lines = format_text(make_result(two_stage, ignored=ignored)).splitlines()
    # common practice: a shortened list says how many it left out (the total less the three shown)
    assert f"  ... and {count - 3} more" in lines
    assert sum(line.startswith("  circuits/front_end.cir:") for line in lines) == 3


def test_a_gain_crossover_row_gives_its_delay_margin_in_seconds(stable_result):
    """The crossover row's delay margin is PM / (360 deg fc) in seconds, from python-control's PM and crossover."""
    s = control.tf("s")
    _, pm, _, _, w_gc, _ = control.stability_margins(1e4 / ((1 + s / (W * 1e3)) * (1 + s / (W * 3e7)) * (1 + s / (W * 1e8))))
    delay = pm / 360 / (w_gc / W)  # delay margin = PM [rad] / wc (Skogestad and Postlethwaite, Multivariable Feedback Control, 2005)
    row = next(line for line in format_text(stable_result).splitlines() if " down " in line)
    assert row.endswith(f"delay margin {delay * 1e9:.1f} ns")  # 19.6 ns


def test_a_phase_crossover_at_dc_is_called_dc():
    """A loop with positive feedback at DC, T = -0.5 / (1 + s / 1 kHz) (invented), has its phase crossover at DC: the row
    says "DC", not "0 Hz", with |T| = -6.02 dB and an upper gain margin of 6.02 dB, and the gain margin line says "at DC" too."""
    def positive(f):
        s = 1j * W * np.asarray(f)
        return -0.5 / (1 + s / (W * 1e3))

    text = format_text(make_result(positive))
    gm = 20 * math.log10(2)  # T(0) = -0.5 is real and negative: -1 is reached when the gain doubles (Nyquist criterion)
    assert re.search(rf"^ +DC  upper \|T\| +-{gm:.2f} dB  GM {gm:.2f} dB +\(phase -180 deg\)$", text, re.M)
    assert re.search(rf"^gain margin +{gm:.2f} dB at DC$", text, re.M)


def test_a_stable_loop_without_a_gain_crossover_says_so_in_its_verdict():
    """An analysis without self-checks (LoopAnalysis.checks defaults to (), as a library caller may build one) of a loop
    whose |T| stays above 0 dB to the top of its sweep reads "stable by the Nyquist count; no gain crossover"."""
    from dataclasses import replace

    def single_pole(f):
        s = 1j * W * np.asarray(f)
        return 1e4 / (1 + s / (W * 1e3))

    r = make_result(single_pole, freq_hz=np.logspace(0, 5, 51))
    unchecked = replace(r, analysis=replace(r.analysis, checks=()))
    # a single pole's T never encircles -1 (Nyquist criterion) and |T(100 kHz)| = 40 dB > 0 dB: no crossover in the sweep
    assert format_text(unchecked).splitlines()[0] == "PASS  stable by the Nyquist count; no gain crossover in the sweep"


@pytest.mark.parametrize("value,unit,text", [(math.inf, "", "inf"), (-math.inf, "", "-inf"), (math.nan, "", "nan"),
                                             (math.inf, "Hz", "inf Hz"), (None, "Hz", "-")])
def test_special_values_in_engineering_notation_carry_no_stray_space(value, unit, text):
    """Infinity and NaN print as Python names them, followed by the unit when there is one and by nothing else."""
    from netloop.report.notation import eng

    assert eng(value, unit) == text  # IEEE 754 specials, as Python's float repr spells them


def test_the_estimate_without_a_fit_gives_the_resonant_peak_of_its_damping(marginal_result):
    """With no poles fitted, the second-order estimate of the 32.7 deg loop peaks 1 / (2 z sqrt(1 - z^2)) in dB, z its damping."""
    from dataclasses import replace

    unfitted = replace(marginal_result, analysis=replace(marginal_result.analysis, poles=None))
    text = " ".join(format_text(unfitted).split())
    z = float(re.search(r"2nd-order ESTIMATE damping ([0-9.]+),", text).group(1))
    peak = -20 * math.log10(2 * z * math.sqrt(1 - z * z))  # Ogata, Modern Control Engineering: Mr of a second-order system
    assert re.search(rf"resonant peak {peak:.1f}\d dB \(from PM alone", text)


def test_the_warnings_and_the_copied_subcircuits_have_rows_of_their_own(quiet_result):
    """A result's warnings follow a "warnings" heading, one "  - " line each; a break inside one instance names the
    subcircuits copied for it in the break's rows."""
    from dataclasses import replace

    lines = format_text(quiet_result).splitlines()
    at = lines.index("warnings")
    assert lines[at + 1 : at + 1 + len(quiet_result.warnings)] == [f"  - {w}" for w in quiet_result.warnings]
    inside = replace(quiet_result, breaks=replace(quiet_result.breaks, copied_subcircuits=(("ota", "ota__xamp"),)))
    assert re.search(r"^  copied subcircuits +ota -> ota__xamp$", format_text(inside), re.M)


def test_the_poles_row_says_whether_their_count_agrees_with_nyquist(stable_result):
    """The closed-loop poles row says "(agrees with Nyquist; ...)" when the fitted poles count as many in the RHP as the
    Nyquist count (README's example summary), and "DISAGREES with" in capitals, as the other alarms read, when not."""
    from dataclasses import replace

    from netloop.report.phrases import closed_loop_phrases

    a = stable_result.analysis
    assert not any(np.roots(np.polyadd(_poly(1e3, 3e7, 1e8), [1e4])).real > 0)  # closed form of 1 + T: no RHP root
    assert a.poles.agrees_with_nyquist and a.poles.rhp_count == 0
    row = dict(closed_loop_phrases(a))["closed-loop poles"]
    assert "; 0 in the RHP (agrees with Nyquist; fitted to the measured 1/(1+T), fit error " in row
    odd = replace(a, poles=replace(a.poles, rhp_count=2, agrees_with_nyquist=False))
    assert "; 2 in the RHP (DISAGREES with Nyquist; fitted to the measured 1/(1+T), fit error " in dict(closed_loop_phrases(odd))["closed-loop poles"]
