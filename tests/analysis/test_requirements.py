"""Requirement text ("pm>=60") is parsed strictly and checked against an analysis."""

from __future__ import annotations

import math

import control
import numpy as np
import pytest
from analysis_loops import sample

from netloop.analysis import analyse, parse_requirement, parse_requirements
from netloop.errors import PlanError

S = control.tf("s")
THREE_POLE = control.tf([25], [1, 10, 10, 10])  # PM 29.11 deg, GM 3.6 (python-control 0.10)


@pytest.fixture(scope="module")
def three_pole():
    return analyse(*sample(THREE_POLE, 1e-4, 1e3), fit_poles=False)


@pytest.mark.parametrize(
    "text,metric,op,threshold",
    [
        ("pm>=60", "pm", ">=", 60.0),
        ("  PM >= 45deg ", "pm", ">=", 45.0),
        ("fc > 1meg", "fc", ">", 1e6),
        ("fc>1megHz", "fc", ">", 1e6),
        ("fc<2.5k", "fc", "<", 2.5e3),
        ("dm>=10u", "dm", ">=", 10e-6),
        ("dm>=10us", "dm", ">=", 10e-6),
        ("dm<1ms", "dm", "<", 1e-3),
        ("gm>6dB", "gm", ">", 6.0),
        ("lgm>=1e1", "lgm", ">=", 10.0),
        ("mm>=0.5", "mm", ">=", 0.5),
        ("dc>=-3", "dc", ">=", -3.0),
        ("peak<=3db", "peak", "<=", 3.0),
        ("fc>=.5g", "fc", ">=", 0.5e9),
    ],
)
def test_parse(text, metric, op, threshold):
    """Metric, operator and scaled threshold (m is milli, meg is mega; every spelling: tests/analysis/test_quantities.py) are read exactly."""
    r = parse_requirement(text)
    assert (r.metric, r.op) == (metric, op)
    assert r.threshold == pytest.approx(threshold, rel=1e-15)


@pytest.mark.parametrize(
    "text,fault",
    [
        ("pm=60", "does not have the form METRIC OP VALUE"),
        ("phase>=60", "unknown metric 'phase'"),
        ("pm>=sixty", "'sixty' is not a number"),
        ("pm>=60db", "is a level in dB (dB), but an angle is expected"),
        ("mm>=0.5db", "but a plain number is expected"),
        ("fc>1x", "'x' is not a multiplier or unit for a frequency"),
        ("fc>=100M", "is ambiguous: SPICE reads M as milli, SI as mega; write 100meg or 100MHz"),
        ("fc>=100mhz", "write 100MHz (or 100meg) for mega hertz, 100mHz for milli hertz"),
        ("fc>=10ns", "'10ns' is a time (s), but a frequency is expected"),
        ("", "does not have the form METRIC OP VALUE"),
    ],
)
def test_bad_text_raises_plan_error_saying_what_was_expected(text, fault):
    """Unreadable text raises PlanError (a ValueError) that quotes it, names the fault and shows the expected form."""
    with pytest.raises(PlanError, match="expected METRIC OP VALUE") as info:
        parse_requirement(text)
    assert fault in str(info.value) and repr(text) in str(info.value)
    assert isinstance(info.value, ValueError)


def test_parse_several_comma_separated():
    """Several requirements in one string or many are read in order."""
    reqs = parse_requirements(["pm>=45, gm>=6", "fc>1"])
    assert [r.metric for r in reqs] == ["pm", "gm", "fc"]


def test_check_pass_and_fail_on_values_from_python_control(three_pole):
    """On the three-pole loop (PM 29.11 deg, GM 3.6 by python-control) pm>=25 and gm>=10 pass, pm>=45 fails."""
    assert parse_requirement("pm>=25").check(three_pole).passed
    assert parse_requirement("gm>=10").check(three_pole).passed  # 20 log10 3.6 = 11.1 dB
    out = parse_requirement("pm>=45").check(three_pole)
    assert not out.passed and out.value == pytest.approx(29.11, abs=0.01)
    assert "fails" in out.reason and "29.11" in out.reason
    assert parse_requirement("fc<1").check(three_pole).passed  # 1.7844 rad/s = 0.284 Hz
    assert parse_requirement("dm>200m").check(three_pole).passed  # 0.2847 s
    assert not parse_requirement("peak<3").check(three_pole).passed


def test_missing_metric_fails_with_reason():
    """A loop that never reaches 0 dB fails pm, fc and dm requirements, each saying it does not regulate or has no crossover."""
    a = analyse(*sample(0.5 / (S + 1) ** 2, 1e-3, 1e3), fit_poles=False)
    for text in ("pm>=0", "fc>0", "dm>0"):
        out = parse_requirement(text).check(a)
        assert not out.passed and out.value is None
    assert "does not regulate" in parse_requirement("pm>=0").check(a).reason
    assert parse_requirement("dc<0").check(a).passed


def test_documented_infinite_gain_margin_case():
    """A reliably stable loop with no upper phase crossover has gm = +inf: >= passes, <= fails (documented case)."""
    a = analyse(*sample(30 / (S * (S + 3)), 1e-4, 1e4), fit_poles=False)  # phase never reaches -180
    assert a.nyquist.reliable and a.stable and a.margins.gain_margin_db is None
    ge = parse_requirement("gm>=20").check(a)
    assert ge.passed and ge.value == math.inf and "without limit" in ge.reason
    assert not parse_requirement("gm<=20").check(a).passed


def test_unstable_loop_has_no_lower_gain_margin_to_pass():
    """For an unstable loop lgm does not exist, so an lgm requirement fails with that reason."""
    a = analyse(*sample(5 * THREE_POLE, 1e-4, 1e3), fit_poles=False)
    out = parse_requirement("lgm>=0").check(a)
    assert not out.passed and "unstable" in out.reason
    assert not parse_requirement("gm>=0").check(a).passed  # python-control: GM 0.72 < 1


def test_gain_requirement_on_a_doubtful_nyquist_count_does_not_pass():
    """30/(s(s+3)) swept only to 1 Hz, where |T| is still -3.3 dB: the data cannot show the phase stays off -180 deg, so gm>=6 and lgm>=6 do not pass."""
    w = 2 * math.pi  # closed form at the top of the sweep: |T(j 2 pi 1 Hz)| = 30 / (w sqrt(w^2 + 9)) = 0.685
    assert 20 * math.log10(30 / (w * math.hypot(w, 3))) == pytest.approx(-3.28, abs=0.01)
    a = analyse(*sample(30 / (S * (S + 3)), 1e-4, 1.0), fit_poles=False)
    assert not a.nyquist.reliable and a.margins.gain_margin_db is None and not a.phase_crossovers
    for text in ("gm>=6", "lgm>=6", "gm>6"):
        out = parse_requirement(text).check(a)
        assert not out.passed and out.value is None, text
        assert "Nyquist count is not reliable" in out.reason and "-20 dB" in out.reason  # says why and what to try


@pytest.mark.parametrize("op,passes", [(">", False), (">=", True), ("<", False), ("<=", True)])
def test_operators_at_equality(op, passes):
    """At a value exactly equal to the threshold the strict operators fail and the others pass."""
    f = np.logspace(-12, 3, 151)  # T = 100/(1 + s) from 1e-12 Hz: |T| = 100 there to 1e-22 (closed form)
    a = analyse(f, 100.0 / (1 + 2j * math.pi * f), fit_poles=False)
    assert a.dc_gain_db == 40.0  # 20 log10(100), exact in binary floating point
    out = parse_requirement(f"dc{op}40").check(a)
    assert out.passed is passes and out.value == 40.0


def test_every_metric_reads_its_own_figure(three_pole):
    """Each metric checks the figure of its name, in its unit, against python-control 0.10 on the three-pole loop 25/(s^3 +
    10 s^2 + 10 s + 10): pm, gm (20 log10), fc (w/2 pi), mm (stability margin, min |1 + L|), dm (PM in rad / w_gc), dc
    (20 log10 L(0) = 20 log10 2.5) and peak (max |L/(1+L)| over its value at DC, on python-control's closed loop)."""
    gm, pm, sm, _, wgc, _ = control.stability_margins(THREE_POLE)  # python-control 0.10
    w = np.logspace(-3, 2, 20001)
    closed = np.abs(control.feedback(THREE_POLE, 1)(1j * w))
    expected = {
        "pm": (pm, "deg"), "gm": (20 * math.log10(gm), "dB"), "fc": (wgc / (2 * math.pi), "Hz"), "mm": (sm, ""),
        "dm": (math.radians(pm) / wgc, "s"), "dc": (20 * math.log10(2.5), "dB"),
        "peak": (20 * math.log10(closed.max() / closed[0]), "dB"),
    }
    for metric, (value, unit) in expected.items():
        out = parse_requirement(f"{metric}>=-1e9").check(three_pole)
        assert out.value == pytest.approx(value, rel=1e-3, abs=1e-6), metric
        assert out.passed and out.reason.startswith(f"{metric}>=-1e9: passes, ")
        assert out.reason.endswith(f" is {out.value:.6g}" + (f" {unit}" if unit else "")), out.reason
        assert not parse_requirement(f"{metric}<-1e9").check(three_pole).passed


def test_a_requirement_that_is_not_text_is_refused_with_the_whole_expected_form():
    """A number given where requirement text belongs (say from a plan's TOML) is refused by one message that quotes it and
    lists every metric and operator (house rule: what was expected)."""
    with pytest.raises(PlanError) as info:
        parse_requirement(60)
    assert str(info.value) == ("cannot read requirement '60': it is not text; expected METRIC OP VALUE such as 'pm>=60', "
                               "'fc>100MHz' or 'dm>=1ns', with METRIC one of pm, gm, lgm, fc, mm, dm, dc, peak and OP one of "
                               ">= <= > <")
