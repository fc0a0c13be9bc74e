"""Adaptive refinement asks the caller for samples near crossovers until the phase margin settles."""

from __future__ import annotations

from dataclasses import replace

import control
import numpy as np
import pytest
from analysis_loops import sample

from netloop.analysis import analyse, propose_frequencies, refine
from netloop.errors import AnalysisError

S = control.tf("s")
RESONANT = 2 / (S * (S / 10 + 1) * (S**2 / 1.5**2 + 2 * 0.3 * S / 1.5 + 1))  # our own shape: a resonance near crossover


def evaluator(loop, calls):
    def evaluate(freq_hz):
        calls.append(np.array(freq_hz))
        return loop(2j * np.pi * np.asarray(freq_hz))

    return evaluate


def test_refine_reaches_the_exact_phase_margin_from_coarse_data():
    """From 5 points per decade, refine() converges to python-control's exact PM within 1e-4 deg."""
    _, pm, _, _, _, _ = control.stability_margins(RESONANT)  # python-control 0.10 (polynomial roots)
    f, t = sample(RESONANT, 1e-3, 1e3, per_decade=5)
    coarse = analyse(f, t, fit_poles=False).margins.phase_margin_deg
    assert abs(coarse - pm) > 1e-3  # the coarse data alone is not good enough
    calls = []
    out = refine(evaluator(RESONANT, calls), f, t, tol_deg=1e-5)
    assert out.converged and out.rounds == len(calls) >= 2
    assert out.points_added == sum(c.size for c in calls)
    assert out.analysis.margins.phase_margin_deg == pytest.approx(pm, abs=1e-4)
    assert out.last_change_deg < 1e-5
    assert out.analysis.freq_hz.size == f.size + out.points_added
    assert np.all(np.diff(out.analysis.freq_hz) > 0)


def test_proposals_bracket_the_crossovers_and_are_new():
    """Proposed frequencies lie in and beside the intervals holding crossovers, none already sampled."""
    f, t = sample(RESONANT, 1e-3, 1e3, per_decade=5)
    a = analyse(f, t, fit_poles=False)
    new = propose_frequencies(f, t, points_per_interval=3)
    assert new.size > 0 and not np.any(np.isin(new, f)) and np.all(np.diff(new) > 0)
    for c in a.gain_crossovers + a.phase_crossovers:
        i = np.searchsorted(f, c.freq_hz) - 1
        inside = new[(new > f[i]) & (new < f[i + 1])]
        assert inside.size == 3
    # every proposal is within one sample interval of some crossover
    events = np.array([c.freq_hz for c in a.gain_crossovers + a.phase_crossovers])
    step = np.log10(f[1] / f[0])
    assert np.all(np.min(np.abs(np.log10(new)[:, None] - np.log10(events)[None, :]), axis=1) < 2 * step)


def test_no_crossover_needs_no_refinement():
    """A loop without crossovers asks for nothing and counts as converged."""
    f, t = sample(0.5 / (S + 1), 1e-3, 1e3)
    calls = []
    out = refine(evaluator(0.5 / (S + 1), calls), f, t)
    assert propose_frequencies(f, t).size == 0
    assert out.converged and out.rounds == 0 and calls == [] and out.last_change_deg is None


def test_evaluate_returning_the_wrong_length_is_an_analysis_error():
    """A caller whose evaluate() returns the wrong number of values gets an AnalysisError saying so."""
    f, t = sample(RESONANT, 1e-3, 1e3, per_decade=5)
    with pytest.raises(AnalysisError, match="expected one T per frequency"):
        refine(lambda fr: np.ones(3, dtype=complex), f, t)


def test_a_draft_analysis_has_every_crossover_and_margin_of_the_whole_one():
    """What a refinement round reads (crossovers, phase and gain margins, Nyquist verdict) is the same in a draft as in
    the whole analysis, on a resonant loop and on a conditionally stable one; only the modulus margin and peaking are
    left out (NaN) and no poles are fitted."""
    conditional = 1e4 * (S / 10 + 1) ** 2 / ((S + 1e-3) * (S / 0.1 + 1) * (S / 1 + 1) * (S / 100 + 1) ** 2)  # our own shape
    for loop in (RESONANT, conditional):
        f, t = sample(loop, 1e-5, 1e5, per_decade=10)
        whole, draft = analyse(f, t), analyse(f, t, draft=True)
        if loop is conditional:
            assert len(whole.phase_crossovers) == 3 and whole.margins.lower_gain_margin_db is not None  # the case is what it claims
        assert draft.gain_crossovers == whole.gain_crossovers and draft.phase_crossovers == whole.phase_crossovers
        # a draft assumes P = 0; the whole analysis reads P from the data (0 for these stable-block loops)
        assert draft.nyquist.open_loop_rhp_from == "assumed" and whole.nyquist.open_loop_rhp_from == "fit"
        assert replace(draft.nyquist, open_loop_rhp_from="fit") == whole.nyquist
        for field in ("phase_margin_deg", "unity_gain_hz", "gain_margin_db", "lower_gain_margin_db", "delay_margin_s"):
            assert getattr(draft.margins, field) == getattr(whole.margins, field), field
        assert np.isnan(draft.margins.modulus_margin) and np.isnan(draft.peaking.peak_db)
        assert draft.poles is None and whole.poles is not None
