"""A requirement's reason carries a note only when the metric is missing or infinite."""

from __future__ import annotations

import numpy as np

from netloop.analysis import analyse, parse_requirement


def _two_pole(a0=1e3, p1=1e3, p2=1e6):
    f = np.logspace(0, 10, 401)
    s = 2j * np.pi * f
    return f, a0 / ((1 + s / (2 * np.pi * p1)) * (1 + s / (2 * np.pi * p2)))


def test_met_phase_margin_has_no_missing_note():
    """A passing pm requirement on a loop with a crossover does not claim the crossover is missing."""
    analysis = analyse(*_two_pole(), fit_poles=False)
    outcome = parse_requirement("pm>=10").check(analysis)
    assert outcome.passed and outcome.value is not None
    assert "no gain crossover" not in outcome.reason


def test_missing_phase_margin_fails_with_the_reason():
    """A loop below 0 dB fails pm>=45 and says it does not regulate (the metric does not exist)."""
    f, t = _two_pole(a0=0.5)
    outcome = parse_requirement("pm>=45").check(analyse(f, t, fit_poles=False))
    assert not outcome.passed and outcome.value is None
    assert "does not regulate" in outcome.reason


def test_parsed_and_text_requirements_mix_in_order():
    """parse_requirements passes parsed requirements through and keeps the order it was given."""
    from netloop.analysis import parse_requirements

    gm = parse_requirement("gm>=10")
    out = parse_requirements(["pm>=45", gm, "dc>=40, fc>=1meg"])
    assert [r.metric for r in out] == ["pm", "gm", "dc", "fc"] and out[1] is gm
