"""A draft finished (analyse_draft, then finish) is the whole analysis of the same data, field for field and bit for bit."""

from __future__ import annotations

import math

import control
import numpy as np
import pytest
from analysis_loops import closed_loop_rhp_roots, sample

from netloop.analysis import analyse
from netloop.analysis.engine import analyse_draft, finish

S = control.tf("s")

# (num, den) of T(s), highest power first, and the sweep: the loops of test_outcomes.py and test_self_checks.py
LOOPS = {
    "one integrator": (([2.0], [1.0, 1.0, 0.0]), 1e-4, 1e4),  # 2 / (s (s + 1))
    "two integrators": (([1.0, 0.5], [0.1, 1.0, 0.0, 0.0]), 1e-4, 1e4),  # (s + 0.5) / (s^2 (0.1 s + 1))
    "positive feedback at DC": (([-5.0], [1.0, 1.0]), 1e-4, 1e4),  # -5 / (s + 1): unstable
    "conditionally stable": (  # 1e4 (s/10 + 1)^2 / ((s + 1e-3)(s/0.1 + 1)(s + 1)(s/100 + 1)^2), test_self_checks.py
        ([1e4 / 100, 2e4 / 10, 1e4], np.polymul(np.polymul([1.0, 1e-3], [10.0, 1.0]), np.polymul([1.0, 1.0], [1e-4, 2e-2, 1.0]))),
        1e-5, 1e5),
    "RHP pole, P from the fit": (([30.0], np.polymul([1.0, -1.0], [0.1, 1.0])), 1e-4, 1e4),  # 30 / ((s - 1)(s/10 + 1)): stable
    "RHP pole, unstable": (([0.5], np.polymul([1.0, -1.0], [0.1, 1.0])), 1e-4, 1e4),
    "does not regulate": (([0.5], [1.0, 2.0, 1.0]), 1e-3, 1e3),  # 0.5 / (s + 1)^2
}
CLAIMS = {  # each case is what its name says (read from the whole analysis)
    "one integrator": lambda a: a.nyquist.origin_poles == 1,
    "two integrators": lambda a: a.nyquist.origin_poles == 2,
    "positive feedback at DC": lambda a: a.phase_crossovers[0].freq_hz == 0.0 and not a.stable,
    "conditionally stable": lambda a: len(a.phase_crossovers) == 3 and a.margins.lower_gain_margin_db is not None and a.stable,
    "RHP pole, P from the fit": lambda a: a.nyquist.open_loop_rhp_poles == 1 and a.stable,
    "RHP pole, unstable": lambda a: a.nyquist.open_loop_rhp_poles == 1 and not a.stable,
    "does not regulate": lambda a: not a.regulates,
}


def _data(name):
    (num, den), lo, hi = LOOPS[name]
    return control.tf(num, den), *sample(control.tf(num, den), lo, hi)


def _same(a, b) -> None:
    """Field for field: the records' repr (floats in repr are exact, NaN included) and the data arrays, bit for bit."""
    assert repr(a) == repr(b)
    assert a == b or any(isinstance(v, float) and math.isnan(v) for v in (a.margins.modulus_margin, a.peaking.peak_db))
    for field in ("freq_hz", "t"):
        x, y = getattr(a, field), getattr(b, field)
        assert x.dtype == y.dtype and x.tobytes() == y.tobytes(), field


@pytest.mark.parametrize("name", list(LOOPS))
def test_a_finished_draft_is_the_whole_analysis(name):
    """finish(analyse_draft(f, T)) equals analyse(f, T) in every field (P read from the fit, its notes last among the
    warnings, the checks of the final count), the draft itself equals analyse(..., draft=True), and the figures only the
    finish computes are python-control's and numpy's: Z (numpy.roots of den + num), P (python-control's poles), the
    modulus margin (min |1 + L| over the sweep, L(s) from python-control on a dense grid)."""
    loop, f, t = _data(name)
    draft = analyse_draft(f, t)
    _same(draft.analysis, analyse(f, t, draft=True))
    whole = finish(draft)
    _same(whole, analyse(f, t))
    _same(finish(draft), whole)  # a draft is not used up: finished again, it gives the same
    _same(draft.analysis, analyse(f, t, draft=True))
    (num, den), _, _ = LOOPS[name]
    assert CLAIMS[name](whole)
    assert whole.nyquist.open_loop_rhp_from == "fit"
    assert whole.nyquist.open_loop_rhp_poles == int(np.sum(np.real(control.poles(loop)) > 0))  # reference: python-control
    assert whole.nyquist.closed_loop_rhp_poles == closed_loop_rhp_roots(num, den)  # reference: numpy.roots of den + num
    _, lo, hi = LOOPS[name]
    dense = loop(2j * np.pi * np.logspace(np.log10(lo), np.log10(hi), 40_001))  # python-control's L(s), 40,001 points over the sweep
    assert whole.margins.modulus_margin == pytest.approx(np.min(np.abs(1.0 + dense)), rel=1e-4)
    assert not math.isnan(whole.peaking.peak_db) and math.isnan(draft.analysis.peaking.peak_db)


@pytest.mark.parametrize("name", list(LOOPS))
@pytest.mark.parametrize("given, fit_poles", [(None, False), (0, True), (1, True), (1, False)])
def test_a_finished_draft_keeps_a_given_p_and_the_choice_of_fit(name, given, fit_poles):
    """With P given (the override, said to be "given") or the pole fit left out (P "assumed" 0), the finished draft is
    still analyse()'s whole analysis of the same data, field for field; and Z = N + P with the P used."""
    _, f, t = _data(name)
    whole = finish(analyse_draft(f, t, open_loop_rhp_poles=given), fit_poles=fit_poles)
    _same(whole, analyse(f, t, open_loop_rhp_poles=given, fit_poles=fit_poles))
    assert whole.nyquist.open_loop_rhp_from == ("given" if given is not None else "assumed")
    assert whole.nyquist.closed_loop_rhp_poles == whole.nyquist.encirclements + (given or 0)  # Nyquist: Z = N + P
    assert (whole.poles is not None) is fit_poles


def test_a_finished_draft_ends_its_warnings_with_the_pole_fit_notes():
    """T = 8/(s+1)^3 sampled where T = -1 (w = sqrt 3: (1 + j sqrt 3)^3 = -8, our derivation): the finished draft is the
    whole analysis, with the pole fit's note (no fit) after the draft's own warnings, and |1 + T| = 0 there (closed form)."""
    loop = 8 / (S + 1) ** 3
    f = np.sort(np.append(np.logspace(-3, 3, 121), math.sqrt(3) / (2 * math.pi)))
    t = loop(2j * np.pi * f)
    t[np.argmin(np.abs(f - math.sqrt(3) / (2 * math.pi)))] = -1.0
    draft = analyse_draft(f, t)
    whole = finish(draft)
    _same(whole, analyse(f, t))
    assert whole.warnings[: len(draft.analysis.warnings)] == draft.analysis.warnings and len(whole.warnings) > len(draft.analysis.warnings)
    assert "equals -1" in whole.warnings[-1] and whole.poles is None
    assert whole.margins.modulus_margin < 1e-12


def test_p_read_from_the_fit_leaves_no_stale_disagreement():
    """T = 30/((s - 1)(s/10 + 1)) has P = 1 (python-control's poles) and Z = 0 (numpy.roots of den + num): the draft's count
    with P assumed 0 (Z = -1) disagrees with the fit's 0, but once P is read from the fit the two agree, so the finished
    analysis carries no note of a disagreement."""
    loop, f, t = _data("RHP pole, P from the fit")
    (num, den), _, _ = LOOPS["RHP pole, P from the fit"]
    assert int(np.sum(np.real(control.poles(loop)) > 0)) == 1 and closed_loop_rhp_roots(num, den) == 0
    draft = analyse_draft(f, t)
    assert draft.analysis.nyquist.closed_loop_rhp_poles == -1  # N = -1, P assumed 0
    whole = finish(draft)
    assert whole.nyquist.closed_loop_rhp_poles == 0 and whole.poles.agrees_with_nyquist
    assert not any("pole fit finds" in w for w in whole.warnings)


def test_analyse_fits_the_poles_to_the_tolerance_asked():
    """analyse() hands pole_fit_rtol to the fit: T = 100/(1 + s) (1 + 1e-4 s/(s + 10)) (closed-loop poles -101.01 and -10,
    numpy.roots of s^2 + 111.01 s + 1010) fitted to 1e-3 stops with the one dominant pole (scipy's AAA stopping rule, as
    tests/analysis/test_poles_pairs.py shows for closed_loop_poles), fitted to the default 1e-10 gives both."""
    f = np.logspace(-2, 4, 121)
    s = 2j * math.pi * f
    t = 100 / (1 + s) * (1 + 1e-4 * s / (s + 10))
    exact = np.sort(np.roots([1.0, 111.01, 1010.0]).real)
    loose = analyse(f, t, pole_fit_rtol=1e-3).poles
    assert 1e-6 < loose.fit_error <= 1e-3
    assert [p.real for p in loose.poles_rad_s] == pytest.approx([exact[0]], rel=1e-3)
    assert len(analyse(f, t).poles.poles_rad_s) == 2
