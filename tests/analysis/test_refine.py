"""Adaptive refinement asks the caller for samples near crossovers until the phase margin settles."""

from __future__ import annotations

from dataclasses import replace

import control
import numpy as np
import pytest
from analysis_loops import sample

from netloop.analysis import analyse, propose_frequencies, refine
from netloop.analysis.refine import crossings, propose_around
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


# ---- where the proposals go: the rule of propose_frequencies' docstring, checked interval by interval ----

TWO_POLE_LEAD = 100 * (S / 1e3 + 1) / ((S + 1) * (S / 1e6 + 1))  # our own shape: crossover near 16 Hz, phase near 0 above 1e3 rad/s


def _documented_proposals(a, per_interval: int) -> np.ndarray:
    """The docstring's rule: split the interval [f_i, f_i+1) holding each crossover (the last interval also holds the top
    sample; a DC phase crossover excepted), its neighbours, and every coarse interval into per_interval + 1 equal log steps."""
    f, x = a.freq_hz, np.log10(a.freq_hz)
    chosen = set()
    for c in a.gain_crossovers + tuple(c for c in a.phase_crossovers if c.freq_hz > 0.0):
        i = min(int(np.count_nonzero(f <= c.freq_hz)) - 1, f.size - 2)
        chosen |= {j for j in (i - 1, i, i + 1) if 0 <= j < f.size - 1}
    chosen |= {int(np.flatnonzero(f == low)[0]) for low, _ in a.nyquist.coarse_hz}
    steps = np.arange(1, per_interval + 1) / (per_interval + 1)
    return np.sort(np.concatenate([10.0 ** (x[j] + (x[j + 1] - x[j]) * steps) for j in sorted(chosen)]))


def _edge_sweeps():
    """Sweeps whose crossovers or coarse intervals sit at the edges, or below 1 Hz, or at DC."""
    fc = 0.3121269110918744  # RESONANT's gain crossover (Hz), read from a 5-per-decade analysis; only its place matters
    conditional = 1e4 * (S / 10 + 1) ** 2 / ((S + 1e-3) * (S / 0.1 + 1) * (S / 1 + 1) * (S / 100 + 1) ** 2)  # our own shape
    lead_f = np.concatenate([[1e-3], np.logspace(0, 4, 41), [1e8]])  # a wide first and last interval: phase steps > 60 deg
    return {
        "resonant": sample(RESONANT, 1e-3, 1e3, per_decade=5),
        "crossover in the first interval": sample(RESONANT, 0.9 * fc, 1e3, per_decade=5),
        "crossover in the last interval": sample(RESONANT, 1e-3, 1.1 * fc, per_decade=5),
        "conditionally stable, crossovers from 1e-3 to 10 Hz": sample(conditional, 1e-5, 1e5, per_decade=5),
        "coarse first and last intervals": (lead_f, TWO_POLE_LEAD(2j * np.pi * lead_f)),
        "positive feedback at DC": sample(-10 / (S + 1), 1e-3, 1e3, per_decade=5),
    }


EDGE_SWEEPS = _edge_sweeps()


@pytest.mark.parametrize("name", EDGE_SWEEPS)
@pytest.mark.parametrize("per_interval", [1, 3, None])
def test_proposals_follow_the_documented_rule(name, per_interval):
    """Proposals split exactly the intervals holding a crossover (not the DC one), their neighbours and the coarse
    intervals into equal steps in log f, at the edges of the sweep and below 1 Hz too; the default is 3 per interval
    (reference: propose_frequencies' docstring and signature)."""
    f, t = EDGE_SWEEPS[name]
    a = analyse(f, t, fit_poles=False)
    if name == "coarse first and last intervals":
        assert a.nyquist.coarse_hz[0][0] == f[0] and a.nyquist.coarse_hz[-1][1] == f[-1] and len(a.gain_crossovers) == 1
    if name == "positive feedback at DC":
        assert a.phase_crossovers[0].freq_hz == 0.0  # the case is what it claims
    kwargs = {} if per_interval is None else {"points_per_interval": per_interval}
    got = propose_frequencies(f, t, **kwargs)
    want = _documented_proposals(a, 3 if per_interval is None else per_interval)
    assert got.size == want.size
    np.testing.assert_allclose(got, want, rtol=1e-13)
    assert np.array_equal(got, propose_frequencies(f, t, analysis=a, **kwargs))  # the caller's analysis is the same as its own


@pytest.mark.parametrize("name", EDGE_SWEEPS)
def test_the_crossings_alone_propose_what_a_draft_proposes_without_its_coarse_intervals(name):
    """crossings() locates the same crossovers as analyse() on the same data, bit for bit, and gives its worst phase
    margin; the proposals around them (propose_around) are the documented rule's without the Nyquist count's coarse
    intervals: propose_frequencies' own where that count found none (reference: propose_frequencies' docstring)."""
    f, t = EDGE_SWEEPS[name]
    a = analyse(f, t, fit_poles=False)
    found = crossings(f, t)
    assert found.gain_crossovers == a.gain_crossovers and found.phase_margin_deg == a.margins.phase_margin_deg
    assert found.phase_crossovers == tuple(c for c in a.phase_crossovers if c.freq_hz > 0.0)
    got = propose_around(found)
    np.testing.assert_allclose(got, _documented_proposals(replace(a, nyquist=replace(a.nyquist, coarse_hz=())), 3), rtol=1e-13)
    full = propose_frequencies(f, t, analysis=a)
    if not a.nyquist.coarse_hz:
        assert np.array_equal(got, full)
    assert np.all(np.isin(got, full))  # a coarse interval only adds (it may already lie beside a crossover)
    if name == "coarse first and last intervals":
        assert full.size > got.size  # the edge intervals the count found coarse hold no crossover


def test_a_crossover_read_a_rounding_error_outside_the_sweep_still_refines_the_edge_intervals():
    """10**log10(f) need not give back f: a crossover placed an ulp below the first sample or above the last is held by the
    edge interval, so that interval and its neighbour are split (the docstring's rule; numpy.nextafter for the ulp)."""
    f, t = sample(RESONANT, 1e-3, 1e3, per_decade=5)
    a = analyse(f, t, fit_poles=False)
    x = np.log10(f)
    for edge, first in ((np.nextafter(f[0], 0.0), 0), (np.nextafter(f[-1], np.inf), f.size - 3), (f[-1], f.size - 3)):
        moved = replace(a, gain_crossovers=(replace(a.gain_crossovers[0], freq_hz=float(edge)),), phase_crossovers=(),
                        nyquist=replace(a.nyquist, coarse_hz=()))
        want = np.concatenate([10.0 ** (x[j] + (x[j + 1] - x[j]) * np.arange(1, 4) / 4) for j in (first, first + 1)])
        np.testing.assert_allclose(propose_frequencies(f, t, analysis=moved), want, rtol=1e-13)


def test_a_crossover_on_a_sample_refines_the_interval_above_it_and_both_neighbours():
    """A crossover exactly on sample f_i lies in [f_i, f_i+1) (the docstring's half-open intervals), so intervals i - 1, i
    and i + 1 are split, and i - 2 is not (reference: propose_frequencies' docstring)."""
    f, t = sample(RESONANT, 1e-3, 1e3, per_decade=5)
    a = analyse(f, t, fit_poles=False)
    i = 10
    on = replace(a, gain_crossovers=(replace(a.gain_crossovers[0], freq_hz=float(f[i])),), phase_crossovers=(),
                 nyquist=replace(a.nyquist, coarse_hz=()))
    got = propose_frequencies(f, t, analysis=on)
    assert [int(np.count_nonzero((got > f[j]) & (got < f[j + 1]))) for j in range(i - 2, i + 3)] == [0, 3, 3, 3, 0]


def test_proposals_never_repeat_a_sample_even_one_rounding_error_away():
    """Where two samples are one ulp apart the equal log steps round onto them; those are dropped, so every proposal is
    new (the docstring's 'none already sampled')."""
    f, t = sample(RESONANT, 1e-3, 1e3, per_decade=5)
    f = np.sort(np.append(f, np.nextafter(f[12], np.inf)))  # beside RESONANT's crossover interval (0.25 to 0.40 Hz)
    t = RESONANT(2j * np.pi * f)
    new = propose_frequencies(f, t)
    assert new.size > 0 and not np.any(np.isin(new, f)) and np.all(np.diff(new) > 0)


def test_the_floor_and_open_loop_poles_reach_every_analysis_of_a_refinement():
    """A phase crossover below floor_db is not refined (propose_frequencies' docstring), in the first proposals and in
    later rounds, and the returned analysis uses the floor and P given (four-pole closed form, phase crossover at -39 dB)."""
    loop = 10 / ((S + 1) * (S / 1e3 + 1) ** 3)  # our own shape: gain crossover near 1.6 Hz, phase crossover near 90 Hz
    f, t = sample(loop, 1e-2, 1e4, per_decade=5)
    a = analyse(f, t, fit_poles=False)
    (pc,) = a.phase_crossovers
    assert -60 < pc.gain_db < -30 and analyse(f, t, floor_db=-30, fit_poles=False).phase_crossovers == ()  # the case is what it claims
    far = lambda new: np.all(np.abs(np.log10(new / pc.freq_hz)) > 0.6)  # noqa: E731 - two 0.2-decade intervals and more away
    assert not far(propose_frequencies(f, t)) and far(propose_frequencies(f, t, floor_db=-30))
    for fit in (True, False):
        calls = []
        out = refine(evaluator(loop, calls), f, t, floor_db=-30, open_loop_rhp_poles=0, max_rounds=3, tol_deg=0.0, fit_poles=fit)
        assert len(calls) == 3 and all(far(c) for c in calls)
        np.testing.assert_array_equal(calls[0], propose_frequencies(f, t, floor_db=-30))
        assert out.analysis.floor_db == -30 and len(out.analysis.ignored_phase_crossovers) == 1
        assert out.analysis.nyquist.open_loop_rhp_from == "given"
        assert (out.analysis.poles is not None) == fit  # fit_poles as given (refine's docstring)


# ---- when refine() stops ----


def test_refine_with_its_defaults_settles_to_python_control_and_stops_at_the_first_settled_round():
    """With the defaults (tol 1e-4 deg, 3 points per interval, poles fitted) refine() converges to python-control's PM,
    its last round moved the PM by less than 1e-4 deg and the round before did not (refine's docstring)."""
    _, pm, _, _, _, _ = control.stability_margins(RESONANT)  # python-control 0.10 (polynomial roots)
    f, t = sample(RESONANT, 1e-3, 1e3, per_decade=5)
    calls = []
    out = refine(evaluator(RESONANT, calls), f, t)
    assert out.converged and 2 <= out.rounds < 8 and out.last_change_deg < 1e-4
    assert out.analysis.margins.phase_margin_deg == pytest.approx(pm, abs=1e-4)
    np.testing.assert_array_equal(calls[0], propose_frequencies(f, t, points_per_interval=3))
    assert out.analysis.poles is not None
    before = refine(evaluator(RESONANT, []), f, t, max_rounds=out.rounds - 1)
    assert not before.converged and before.last_change_deg >= 1e-4


def test_points_per_interval_reaches_every_round():
    """refine(points_per_interval=1) asks for the proposals of propose_frequencies(points_per_interval=1) in its first round."""
    f, t = sample(RESONANT, 1e-3, 1e3, per_decade=5)
    calls = []
    refine(evaluator(RESONANT, calls), f, t, points_per_interval=1, max_rounds=1)
    np.testing.assert_array_equal(calls[0], propose_frequencies(f, t, points_per_interval=1))


def test_a_round_that_moves_the_margin_by_exactly_the_tolerance_has_not_settled():
    """'Moves by less than tol_deg' is strict: with tol_deg equal to the first round's change the round has not settled,
    one ulp more and it has (refine's docstring)."""
    f, t = sample(RESONANT, 1e-3, 1e3, per_decade=5)
    change = refine(evaluator(RESONANT, []), f, t, max_rounds=1).last_change_deg
    assert change > 0
    assert not refine(evaluator(RESONANT, []), f, t, max_rounds=1, tol_deg=change).converged
    assert refine(evaluator(RESONANT, []), f, t, max_rounds=1, tol_deg=float(np.nextafter(change, np.inf))).converged


@pytest.mark.parametrize("max_rounds", [None, 2])
def test_a_measurement_that_never_settles_stops_after_max_rounds(max_rounds):
    """A loop whose phase drifts by 0.05 deg between calls (a drifting bench) never settles: refine() stops after
    max_rounds rounds, 8 by default, and says it did not converge (refine's signature and docstring)."""
    f, t = sample(RESONANT, 1e-3, 1e3, per_decade=5)
    calls = []
    drifting = lambda fr: np.exp(-1j * np.radians(0.05) * (len(calls) + 1)) * evaluator(RESONANT, calls)(fr)  # noqa: E731
    out = refine(drifting, f, t, **({} if max_rounds is None else {"max_rounds": max_rounds}))
    assert out.rounds == len(calls) == (8 if max_rounds is None else max_rounds)
    assert not out.converged and out.last_change_deg > 1e-4


def test_a_round_that_finds_new_crossovers_is_not_taken_as_converged():
    """A resonance poking above 0 dB between coarse samples: the first round finds two more crossovers, so its change is
    None and it has not converged; more rounds settle on python-control's three crossovers and worst PM (our own shape)."""
    loop = 1 / (S * (S**2 / 14**2 + S / (14 * 15) + 1))
    f, t = sample(loop, 1e-3, 1e3, per_decade=5)
    assert len(analyse(f, t, fit_poles=False).gain_crossovers) == 1  # the coarse data sees one crossover
    first = refine(evaluator(loop, []), f, t, max_rounds=1)
    assert len(first.analysis.gain_crossovers) == 3 and first.last_change_deg is None and not first.converged
    _, pms, _, _, wcs, _ = control.stability_margins(loop, returnall=True)  # python-control 0.10: every gain crossover
    out = refine(evaluator(loop, []), f, t, tol_deg=1e-6)
    assert out.converged
    np.testing.assert_allclose([c.freq_hz for c in out.analysis.gain_crossovers], np.sort(wcs) / (2 * np.pi), rtol=1e-7)
    assert out.analysis.margins.phase_margin_deg == pytest.approx(min(pms), abs=1e-4)


def test_a_sweep_that_cannot_be_refined_stops_without_asking():
    """Samples one ulp apart around the crossover of 1/(j f) (unity gain at 1 Hz, closed form) leave nothing new to sample:
    refine() asks for nothing, takes no round and does not claim convergence."""
    f = 1.0 + np.spacing(1.0) * np.arange(10)
    loop = lambda s: 2 * np.pi / s  # noqa: E731
    assert len(analyse(f, loop(2j * np.pi * f), fit_poles=False).gain_crossovers) == 1
    calls = []
    out = refine(evaluator(loop, calls), f, loop(2j * np.pi * f))
    assert calls == [] and out.rounds == 0 and out.points_added == 0 and not out.converged and out.last_change_deg is None


def test_refine_returns_no_poles_when_asked_for_none():
    """refine(fit_poles=False) returns an analysis without closed-loop poles, with rounds and without (refine's docstring)."""
    for loop in (RESONANT, 0.5 / (S + 1)):
        f, t = sample(loop, 1e-3, 1e3, per_decade=5)
        out = refine(evaluator(loop, []), f, t, fit_poles=False)
        assert out.analysis.poles is None and (out.rounds > 0) == (loop is RESONANT)


def test_refine_goes_on_while_the_nyquist_count_asks_for_denser_samples():
    """A resonance (12 rad/s, Q 12.24, |T| 1.02 at its peak) whose two crossovers hide between 5-per-decade samples:
    the PM of the one crossover seen settles in two rounds, but the Nyquist count still finds the samples too coarse
    there, so refine() goes on to python-control's three crossovers and worst PM (our own shape)."""
    loop = 1 / (S * (S**2 / 12**2 + S / (12 * 12.24) + 1))
    f, t = sample(loop, 1e-3, 1e3, per_decade=5)
    assert len(analyse(f, t, fit_poles=False).gain_crossovers) == 1  # the coarse data sees one crossover
    _, pms, _, _, wcs, _ = control.stability_margins(loop, returnall=True)  # python-control 0.10: every gain crossover
    out = refine(evaluator(loop, []), f, t)
    assert out.converged and out.analysis.nyquist.coarse_hz == ()
    np.testing.assert_allclose([c.freq_hz for c in out.analysis.gain_crossovers], np.sort(wcs) / (2 * np.pi), rtol=1e-7)
    assert out.analysis.margins.phase_margin_deg == pytest.approx(min(pms), abs=1e-4)


def test_a_loop_without_crossovers_but_too_coarse_samples_is_refined_until_they_are_not():
    """|T| < 1 everywhere but a Q = 5 resonance turns the phase by more than 60 deg between 5-per-decade samples: refine()
    samples the coarse intervals (as propose_frequencies proposes) until the Nyquist count has what it needs (our own
    shape; refine's docstring)."""
    loop = 0.1 / (S**2 / 100 + S / (10 * 5) + 1)
    f, t = sample(loop, 1e-3, 1e3, per_decade=5)
    a = analyse(f, t, fit_poles=False)
    assert a.gain_crossovers == () and a.nyquist.coarse_hz  # the case is what it claims
    calls = []
    out = refine(evaluator(loop, calls), f, t)
    assert out.rounds >= 1 and out.converged and out.analysis.nyquist.coarse_hz == () and out.last_change_deg is None
    np.testing.assert_array_equal(calls[0], propose_frequencies(f, t))


def test_a_proposal_already_sampled_is_left_out_as_np_isin_leaves_it_out():
    """A proposed frequency equal to a sample to the last bit (samples a rounding error apart, whose proposals round onto
    them) is not proposed again, and the proposals are those np.isin leaves (the reference the searchsorted lookup
    replaced), on random ascending sweeps with such pairs."""
    import importlib

    proposals = importlib.import_module("netloop.analysis.refine")._proposals

    def reference(freq, brackets):
        lx = np.log10(freq)
        picked = sorted({j for i in brackets for j in (i - 1, i, i + 1) if 0 <= j < freq.size - 1})
        every = 10.0 ** np.concatenate([lx[j] + (lx[j + 1] - lx[j]) * (np.arange(1, 4) / 4.0) for j in picked])
        return np.unique(every[~np.isin(every, freq)]), every

    freq = np.array([1.0, np.nextafter(1.0, 2.0), 10.0, 100.0])
    got = proposals(freq, [0], [], 3)
    expected, every = reference(freq, [0])
    assert np.any(np.isin(every, freq)) and np.array_equal(got, expected) and not np.any(np.isin(got, freq))
    rng = np.random.default_rng(11)
    for _ in range(300):
        freq = 10.0 ** rng.uniform(-2.0, 10.0, rng.integers(4, 40))
        freq = np.unique(np.append(freq, np.nextafter(freq[: rng.integers(0, 3)], np.inf)))  # pairs one bit apart
        brackets = sorted(set(rng.integers(0, freq.size - 1, 3).tolist()))
        assert np.array_equal(proposals(freq, brackets, [], 3), reference(freq, brackets)[0])


def test_a_first_sweep_without_a_gain_crossover_has_no_phase_margin():
    """crossings() of a loop that never reaches 0 dB: no gain crossover, so no phase margin (None), as a draft reads it."""
    f = np.logspace(0, 8, 81)
    t = 0.5 / (1 + 1j * f / 1e3)  # |T| <= 0.5 everywhere (closed form)
    found = crossings(f, t)
    assert found.gain_crossovers == () and found.phase_margin_deg is None
