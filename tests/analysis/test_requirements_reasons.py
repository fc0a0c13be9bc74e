"""Each way a requirement's metric can be missing or infinite gives its own reason, word for word, and the outcome names its requirement."""

from __future__ import annotations

import functools

import control
import numpy as np
import pytest
from analysis_loops import sample

from netloop.analysis import analyse, parse_requirement

S = control.tf("s")
THREE_POLE = control.tf([25], [1, 10, 10, 10])  # PM 29.11 deg, GM 3.6 (python-control 0.10)

# Each loop is sampled 20 points a decade; what it has and lacks is checked against python-control in test_loop_facts.
LOOPS = {
    "below 0 dB": (0.5 / (S + 1) ** 2, 1e-3, 1e3, None),  # |L| <= 0.5 everywhere (closed form)
    "above 0 dB": (1000 / (S + 1), 1e-3, 0.1, None),  # |L(j 2 pi 0.1)| = 1000/sqrt(1 + 0.395) = 847 > 1
    "unstable": (5 * THREE_POLE, 1e-4, 1e3, None),  # python-control: PM -5.8 deg, GM 0.72
    "two integrators": (30 / (S * (S + 3)), 1e-4, 1e4, None),  # phase in (-180, -90): no phase crossover
    "conditionally stable": (100 * (S + 1) ** 2 / (S + 0.01) ** 3, 1e-5, 1e4, None),  # both phase crossovers above 0 dB
    "two RHP poles": (0.5 / ((S - 1) * (S - 2)), 1e-4, 1e3, 2),  # phase in (0, 180): no phase crossover, never encircles
    "three pole": (THREE_POLE, 1e-4, 1e3, None),  # python-control: GM 3.6, one phase crossover, below 0 dB
    "short sweep": (30 / (S * (S + 3)), 0.3, 1.0, None),  # starts above the pole at 3 rad/s, ends at -3.3 dB
}

NO_REGULATION = "the loop does not regulate (|T| never reaches 0 dB)"
NO_CROSSOVER = "there is no gain crossover in the sweep"
RISE = "no upper phase crossover in the sweep: the gain may rise without limit as far as the data shows"
FALL = "no lower phase crossover in the sweep: the gain may fall without limit as far as the data shows"


@functools.cache
def _analysis(name):
    loop, lo, hi, rhp = LOOPS[name]
    return analyse(*sample(loop, lo, hi), open_loop_rhp_poles=rhp, fit_poles=False)


@pytest.mark.parametrize("name", list(LOOPS))
def test_loop_facts(name):
    """What the cases below lean on, from python-control 0.10: closed-loop stability (poles of feedback(L, 1)), and whether
    L has gain crossovers and phase crossovers below or above 0 dB inside the sweep."""
    loop, lo, hi, _ = LOOPS[name]
    a = _analysis(name)
    stable = bool(np.all(control.poles(control.feedback(loop, 1)).real < 0))
    w = 2 * np.pi * np.logspace(np.log10(lo), np.log10(hi), 4001)
    resp = loop(1j * w)
    mag = np.abs(resp)
    phase = np.unwrap(np.angle(resp))
    crossings = np.flatnonzero(np.diff(np.floor((phase - np.pi) / (2 * np.pi))) != 0)  # between odd multiples of pi
    kinds = {"upper" if mag[i] < 1 else "lower" for i in crossings}
    assert a.nyquist.stable == stable
    assert bool(a.gain_crossovers) == bool(np.any(np.diff(mag > 1)))
    assert {c.kind for c in a.phase_crossovers} == kinds
    assert a.regulates == bool(np.any(mag > 1))


@pytest.mark.parametrize(
    "name,text,reason",
    [
        ("below 0 dB", "pm>=0", NO_REGULATION),
        ("below 0 dB", "fc>=0", NO_REGULATION),
        ("below 0 dB", "dm>=0", NO_REGULATION),
        ("above 0 dB", "pm>=0", NO_CROSSOVER),
        ("above 0 dB", "fc<1", NO_CROSSOVER),
        ("above 0 dB", "dm>=0", NO_CROSSOVER),
        ("unstable", "dm>=0", "no gain crossover has a positive phase margin"),
        ("unstable", "lgm>=0", "the loop is unstable, so it has no lower gain margin"),
        ("two RHP poles", "gm>=0", "the loop is unstable"),
        ("two RHP poles", "lgm<=0", "the loop is unstable, so it has no lower gain margin"),
    ],
)
def test_missing_metric_reason(name, text, reason):
    """A metric that does not exist fails with the reason of its own case (requirements.py docstring): no regulation, no
    crossover in the sweep, no crossover with a positive phase margin, or an unstable loop."""
    req = parse_requirement(text)
    out = req.check(_analysis(name))
    assert out.requirement is req and out.value is None and out.passed is False
    assert out.reason == f"{text}: fails, {reason}"


@pytest.mark.parametrize(
    "name,text,reason",
    [
        ("below 0 dB", "gm>=0", RISE),
        ("below 0 dB", "lgm>=0", FALL),
        ("two integrators", "gm>=6", RISE),
        ("two integrators", "lgm>6", FALL),
        ("conditionally stable", "gm>=100", RISE),
        ("three pole", "lgm>=100", FALL),
    ],
)
def test_infinite_gain_margin_reason(name, text, reason):
    """A reliably stable loop with no phase crossover of the metric's kind has that gain margin +inf and says which way the
    gain may go, even when it has crossovers of the other kind (requirements.py docstring, the one documented case)."""
    req = parse_requirement(text)
    out = req.check(_analysis(name))
    assert out.requirement is req and out.value == np.inf and out.passed is True
    assert out.reason == f"{text}: passes, { {'gm': 'upper', 'lgm': 'lower'}[req.metric]} gain margin is inf dB ({reason})"


def test_conditionally_stable_loop_keeps_its_lower_gain_margin():
    """The conditionally stable loop has a finite lower gain margin, the smaller of its two phase crossovers' gains, which is
    python-control 0.10's smallest gain margin below 1 in dB, while its upper one is +inf."""
    a = _analysis("conditionally stable")
    gms, _, _, _, _, _ = control.stability_margins(LOOPS["conditionally stable"][0], returnall=True)
    expected = -20 * np.log10(np.max(gms[gms < 1]))
    out = parse_requirement("lgm>=40").check(a)
    assert out.passed and out.value == pytest.approx(expected, rel=1e-3)
    assert out.reason == f"lgm>=40: passes, lower gain margin is {out.value:.6g} dB"


def test_doubtful_count_reason_lists_every_doubt():
    """A gain requirement on a loop whose Nyquist count is doubtful for several reasons fails and gives every one of them,
    separated by '; ' (the top of the sweep at -3.3 dB, closed form 20 log10(30 / (w sqrt(w^2 + 9))) at w = 2 pi, and the
    bottom where the pole at 3 rad/s is still turning the phase)."""
    a = _analysis("short sweep")
    assert len(a.nyquist.reasons) >= 2 and a.nyquist.stable and not a.phase_crossovers
    for text in ("gm>=0", "lgm>=0"):
        req = parse_requirement(text)
        out = req.check(a)
        assert out.requirement is req and out.value is None and out.passed is False
        assert out.reason == f"{text}: fails, the Nyquist count is not reliable ({'; '.join(a.nyquist.reasons)})"
    assert "|T| at the top of the sweep (-3.28 dB at 1 Hz)" in a.nyquist.reasons[0]


@pytest.mark.parametrize("text,passed", [("pm>=45", False), ("pm<45", True)])
def test_outcome_with_a_value_names_its_requirement(text, passed):
    """An outcome with a value holds the requirement it came from and says passes or fails before the figure (PM 29.11 deg of
    the three-pole loop, python-control 0.10)."""
    req = parse_requirement(text)
    out = req.check(_analysis("three pole"))
    assert out.requirement is req and out.passed is passed
    assert out.reason == f"{text}: {'passes' if passed else 'fails'}, worst phase margin is {out.value:.6g} deg"


@pytest.mark.parametrize(
    "text,fault",
    [
        ("pm=60", "it does not have the form METRIC OP VALUE"),
        ("pm>=sixty", "worst phase margin: 'sixty' is not a number; expected an angle such as 45 or 45deg"),
        ("fc>=10ns", "unity-gain frequency: '10ns' is a time (s), but a frequency is expected here, such as 1k, 10meg, "
                     "100MHz or 2.5GHz"),
        ("mm>=1db", "modulus margin: '1db' is a level in dB (dB), but a plain number is expected here, such as 0.5 or 2"),
    ],
)
def test_refusal_message_word_for_word(text, fault):
    """The refusal names the fault, with the metric's name (not its unit) before a value's fault, then the expected form."""
    with pytest.raises(ValueError) as info:
        parse_requirement(text)
    assert str(info.value) == (f"cannot read requirement {text!r}: {fault}; expected METRIC OP VALUE such as 'pm>=60', "
                               "'fc>100MHz' or 'dm>=1ns', with METRIC one of pm, gm, lgm, fc, mm, dm, dc, peak and OP one "
                               "of >= <= > <")
