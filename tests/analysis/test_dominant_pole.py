"""The dominant closed-loop pole: the least-damped pole among those that visibly shape 1/(1+T), by its documented definition."""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

from netloop.analysis.poles import DOMINANT_SHARE, dominant_pole

F = np.logspace(-3, 3, 121)  # Hz
S_AXIS = 2j * math.pi * F


def _loop(terms, c=1.0):
    """(freq_hz, T) whose sensitivity is S = 1/(1+T) = c + sum r/(s - p) exactly (partial fractions; a complex pole
    brings its conjugate with the conjugate residue, so S is real)."""
    sens = np.full(F.shape, c, dtype=complex)
    for p, r in terms:
        sens += r / (S_AXIS - p)
        if p.imag != 0:
            sens += np.conj(r) / (S_AXIS - np.conj(p))
    return F, 1.0 / sens - 1.0


def _poles(terms):
    return [q for p, _ in terms for q in ((p, np.conj(p)) if p.imag != 0 else (p,))]


def _weight(p, r):
    """The peak a pole's term reaches on the jw axis, |r| / |Re p| (the definition in dominant_pole's docstring)."""
    return abs(r) / abs(p.real)


# (name, [(pole rad/s, residue)], expected dominant pole); the weights are worked out beside each case
CASES = [
    # a pair of damping 0.01 (weight 0.002/0.1 = 0.02) beside a real pole of weight 1/5 = 0.2: at 10 % of the largest it
    # shapes S visibly and, being the least damped, is dominant (its weight by |p| instead, 0.0002, would be under 1 %)
    ("light pair seen", [(-0.1 + 10j, 0.002), (-5 + 0j, 1.0)], -0.1 + 10j),
    # the same pair with a residue 200 times smaller (weight 1e-4, 0.05 % of the largest) is passed over: the pair of
    # damping 0.6 is the least damped of those that show
    ("light pair faint", [(-0.1 + 10j, 1e-5), (-5 + 0j, 1.0), (-3 + 4j, 0.5)], -3 + 4j),
    # damping 0.02 at |p| = 100 against damping 0.6 at |p| = 5: the damping decides, not the size of Re p times |p|
    ("fast light pair", [(-2 + 100j, 1.0), (-3 + 4j, 0.5)], -2 + 100j),
    # two real poles (damping 1 both): the tie goes to the slower one
    ("tie", [(-1 + 0j, 1.0), (-10 + 0j, 1.0)], -1 + 0j),
    # one real pole alone
    ("one real pole", [(-7 + 0j, 1.0)], -7 + 0j),
]


@pytest.mark.parametrize("name, terms, expected", CASES, ids=[c[0] for c in CASES])
def test_dominant_pole_by_its_definition(name, terms, expected):
    """On a T built from known poles and residues of S, dominant_pole returns the least-damped pole among those whose weight
    |r|/|Re p| is at least DOMINANT_SHARE of the largest (ties: the slower), as the upper member of its pair."""
    weights = [_weight(p, r) for p, r in terms]
    shown = [p for (p, _), w in zip(terms, weights) if w >= DOMINANT_SHARE * max(weights)]
    assert min(shown, key=lambda q: (-q.real / abs(q), -q.real)) == expected  # the definition, on the known weights
    f, t = _loop(terms)
    assert dominant_pole(f, t, _poles(terms)) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("p, f_lo", [(-5e4 - 5e-8j, 1e1), (-1e9 - 1j, 1e6)])
def test_a_real_pole_with_a_trace_of_imaginary_part_is_still_a_candidate(p, f_lo):
    """A fitted real pole carries a rounding trace of imaginary part of either sign; down to -1e-9 of |p| inclusive
    (-1e9 - 1j: |p| is 1e9 in floating point, so the trace is exactly that) it is still the dominant pole."""
    f = np.logspace(np.log10(f_lo), np.log10(f_lo) + 5, 101)
    s = 2j * math.pi * f
    t = 1.0 / (1.0 + abs(p.real) / (s - p.real)) - 1.0  # S = 1 + |p| / (s - p): one real pole (partial fractions)
    assert dominant_pole(f, t, [p]) == p


def test_samples_where_s_or_a_basis_term_is_infinite_are_left_out_silently():
    """Where T = -1 (S infinite) or a sample falls on a pole (1/(s - p) infinite) the sample is left out of the residue fit,
    without a numpy warning, and the others still give the pole; with no more usable samples than poles there is none."""
    terms = [(-0.5 + 3j, 0.2), (-5 + 0j, 1.0)]
    f, t = _loop(terms)
    t = t.copy()
    t[10] = -1.0  # S infinite there
    t[20] = complex(-1.0, 1e-310)  # 1 + T = 1e-310 j: S overflows there
    poles = [*_poles(terms), 2j * math.pi * f[30]]  # a pole exactly on the sample at f[30]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert dominant_pole(f, t, poles) == pytest.approx(-0.5 + 3j, rel=1e-9)
        assert dominant_pole(f[:3], t[:3], _poles(terms)) is None  # 3 samples, 3 poles: the fit is not determined
        assert dominant_pole(f[:4], t[:4], _poles(terms)) is not None
    assert dominant_pole(f, t, []) is None
