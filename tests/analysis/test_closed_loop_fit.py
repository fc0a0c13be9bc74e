"""The closed-loop pole record: the fit's notes on noisy data, the dominant pair's figures, and the cut-off at the top of the sweep."""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np
import pytest

from netloop.analysis.poles import closed_loop_poles

K, W1 = 1000.0, 2 * math.pi * 1e5  # T = K/(1 + s/W1): one closed-loop pole at -(1 + K) W1 (circuit theory)
F = np.logspace(-2, 10, 121)
TOLERANCE = re.compile(r"^the rational fit of 1/\(1\+T\) needed a relative tolerance of (\d)e-(\d\d) \(noisy data\?\)$")


def _noisy_one_pole(noise):
    rng = np.random.default_rng(0)
    return K / (1 + 2j * math.pi * F / W1) * (1 + noise * (rng.standard_normal(F.size) + 1j * rng.standard_normal(F.size)))


@pytest.mark.parametrize("noise", [1e-8, 1e-6])
def test_noisy_data_is_fitted_again_at_its_own_level(noise):
    """Data with relative noise 1e-8 or 1e-6 cannot be fitted to 1e-10: the fit is redone at ten times the smallest error
    reached, which lies between the noise and 100 times it, converges there (fit error within it) and gives the one pole,
    with one note that names the tolerance (poles.py docstring)."""
    poles, notes = closed_loop_poles(F, _noisy_one_pole(noise), nyquist_rhp=0)
    (note,) = notes
    digit, exponent = TOLERANCE.match(note).groups()
    used = float(f"{digit}e-{exponent}")
    assert noise <= used <= 100 * noise and poles.fit_error <= used
    (p,) = poles.poles_rad_s
    assert p.real == pytest.approx(-(1 + K) * W1, rel=20 * noise) and abs(p.imag) <= 20 * noise * abs(p)
    assert poles.rhp_count == 0 and poles.agrees_with_nyquist


def test_data_too_noisy_to_fit_again_says_so():
    """With relative noise 1e-3 the smallest error reached is above 1e-6, so ten times it is looser than the loosest refit
    allowed (1e-5): the fit is not redone, and the notes say it did not converge, with that error, and what tolerance it
    would have needed."""
    poles, notes = closed_loop_poles(F, _noisy_one_pole(1e-3), nyquist_rhp=0)
    first, second = notes
    error = float(re.match(r"^the rational fit of 1/\(1\+T\) did not converge \(relative error ([0-9.e-]+)\); the pole list "
                           r"may be wrong$", first).group(1))
    digit, exponent = TOLERANCE.match(second).groups()
    assert 1e-4 < error < 1e-2 and float(f"{digit}e-{exponent}") == pytest.approx(10 * error, rel=0.2)
    assert poles.fit_error == pytest.approx(error, rel=0.5)


def test_the_note_on_lone_complex_poles_word_for_word():
    """On T measured through ngspice on a 100k-element RC ladder (tests/analysis/data) the note on the lone complex poles
    set aside is the whole sentence a designer reads."""
    data = np.genfromtxt(Path(__file__).parent / "data" / "rc_ladder_100k_T.csv", delimiter=",", names=True, skip_header=2)
    _, notes = closed_loop_poles(data["freq_hz"], data["re"] + 1j * data["im"], nyquist_rhp=0)
    (note,) = [n for n in notes if "conjugate" in n]
    assert re.fullmatch(
        r"[1-9]\d* fitted pole\(s\) without a complex-conjugate partner set aside: a circuit's poles come in conjugate pairs, "
        r"and such poles are how the fit imitates what no low-order rational function follows \(the delay of a distributed "
        r"RC network, noise\)", note)


@pytest.mark.parametrize("zeta, k", [(0.2, None), (0.5, None), (None, 20.0)])
def test_dominant_pair_figures(zeta, k):
    """The dominant pair's damping -Re p/|p|, Q = 1/(2 damping) and |p|/(2 pi), against numpy.roots of the closed loop:
    wn^2/(s (s + 2 zeta wn)) gives s^2 + 2 zeta wn s + wn^2; 20/(s + 1)^3 gives (s + 1)^3 + 20, whose pair lies in the right
    half plane (damping below 0, Q infinite)."""
    f = np.logspace(-3, 4, 141)
    s = 2j * math.pi * f
    if zeta is not None:
        wn = 10.0
        t, char = wn**2 / (s * (s + 2 * zeta * wn)), [1.0, 2 * zeta * wn, wn**2]
    else:
        t, char = k / (s + 1) ** 3, np.polyadd(np.poly([-1.0, -1.0, -1.0]), [k])
    roots = np.roots(char)
    pair = max((r for r in roots if r.imag > 0), key=lambda r: r.real)  # the least damped root above the real axis
    poles, _ = closed_loop_poles(f, t, nyquist_rhp=int(np.sum(roots.real > 0)))
    damping = -pair.real / abs(pair)
    assert poles.dominant_damping == pytest.approx(damping, rel=1e-6)
    assert poles.dominant_q == (pytest.approx(1 / (2 * damping), rel=1e-6) if damping > 0 else math.inf)
    assert poles.dominant_freq_hz == pytest.approx(abs(pair) / (2 * math.pi), rel=1e-6)
    assert poles.rhp_count == int(np.sum(roots.real > 0)) and poles.agrees_with_nyquist
    assert poles.fit_error <= 1e-9


def test_a_real_dominant_pole_has_no_pair_figures():
    """A one-pole loop's dominant pole is real: damping, Q and frequency of a pair do not exist (None, results.py)."""
    poles, _ = closed_loop_poles(F, K / (1 + 2j * math.pi * F / W1), nyquist_rhp=0)
    assert len(poles.poles_rad_s) == 1
    assert poles.dominant_damping is None and poles.dominant_q is None and poles.dominant_freq_hz is None


@pytest.mark.parametrize("where, kept", [(0.99, True), (1.2, False)])
def test_poles_above_the_top_of_the_sweep_are_not_reported(where, kept):
    """A one-pole loop's closed-loop pole at (1 + K) w1 (circuit theory) is reported just below 2 pi f_max (above the
    second-highest sample) and not at 1.2 times it, where the data says nothing reliable (poles.py docstring)."""
    f = np.logspace(0, 4, 41)
    w1 = where * 2 * math.pi * f[-1] / (1 + 10.0)  # places the closed-loop pole at `where` times 2 pi f_max
    poles, _ = closed_loop_poles(f, 10.0 / (1 + 2j * math.pi * f / w1), nyquist_rhp=0)
    assert abs(-(1 + 10.0) * w1) > 2 * math.pi * f[-2]
    assert [round(p.real / (11.0 * w1), 6) for p in poles.poles_rad_s] == ([-1.0] if kept else [])


@pytest.mark.parametrize("k", [30.0, 1.8])
@pytest.mark.parametrize("lo_hz, hi_hz", [(1.0, 1e7), (2e3, 1e8)])
def test_open_loop_rhp_pole_read_from_the_fit(k, lo_hz, hi_hz):
    """T = k/((s/w0 - 1)(s/(10 w0) + 1)), w0 = 2 pi 1 kHz, has one pole in the right half plane at w0 (numpy.roots of its
    denominator): the fit reads it back, on sweeps whose middle is not 1 Hz, and also from a sweep that starts at 2 kHz
    (above the pole, but not ten times above); with k = 1.8 a closed-loop pole sits at -w0, the pole's mirror image, and
    is not taken for its doublet. The closed-loop poles are numpy.roots of (s/w0 - 1)(s/(10 w0) + 1) + k."""
    w0 = 2 * math.pi * 1e3
    f = np.logspace(np.log10(lo_hz), np.log10(hi_hz), int(round(20 * np.log10(hi_hz / lo_hz))) + 1)
    s = 2j * math.pi * f
    den = np.polymul([1 / w0, -1.0], [1 / (10 * w0), 1.0])
    poles, notes = closed_loop_poles(f, k / np.polyval(den, s), nyquist_rhp=0)
    assert sorted(np.roots(den).real) == pytest.approx([-10 * w0, w0])  # the reference pole at +w0
    (p,) = poles.open_loop_rhp_poles_rad_s
    assert p == pytest.approx(w0, rel=1e-6)
    # ordered by size to 6 digits, then by the imaginary part: the two members of a pair differ in size in the last bits,
    # which the fit and numpy.roots round each their own way (on some machines the exact size put the pair's lower
    # member first in one list and last in the other)
    def order(r: complex) -> tuple[float, float]:
        return float(f"{abs(r):.6g}"), r.imag

    expected = sorted(np.roots(np.polyadd(den, [k])), key=order)
    assert sorted(poles.poles_rad_s, key=order) == pytest.approx(expected, rel=1e-6)
    assert not notes


def test_an_open_loop_rhp_pole_above_the_sweep_is_not_read():
    """T = 30/((s/w0 - 1)(s/(10 w0) + 1)) with w0 = 2 pi 2 kHz, swept 1 Hz to 1 kHz: its right-half-plane pole lies above the
    top of the sweep, where the data says nothing reliable (poles.py docstring: zeros of the fit within the sweep only), so
    none is read from the fit."""
    w0 = 2 * math.pi * 2e3
    f = np.logspace(0, 3, 61)
    s = 2j * math.pi * f
    poles, _ = closed_loop_poles(f, 30.0 / ((s / w0 - 1) * (s / (10 * w0) + 1)), nyquist_rhp=0)
    assert w0 > 2 * math.pi * f[-1]
    assert poles.open_loop_rhp_poles_rad_s == ()


@pytest.mark.parametrize("f0", [1e6, 1e8])
def test_an_open_loop_pole_pair_on_the_axis_within_the_fit_tolerance_is_not_read_as_unstable(f0):
    """T = 0.5 w0^2 / (s^2 - (w0/q) s + w0^2) with q = 1e9 has its pole pair a real part of 5e-10 of its size to the
    right of the axis (numpy.roots of the denominator): below the fraction _RHP_REAL = 1e-6 that poles.py's rule reads as
    the right half plane, at 100 and 10,000 times the middle of the sweep, so no open-loop RHP pole is read; with
    q = -1e3 the pair lies 5e-4 of its size to the left, and with q = 1e3, 5e-4 to the right, read as two."""
    f = np.logspace(-2, 10, 121)
    w0, s = 2 * math.pi * f0, 2j * math.pi * f
    for q, read in ((1e9, 0), (-1e3, 0), (1e3, 2)):
        den = [1.0, -w0 / q, w0**2]
        assert np.roots(den).real / np.abs(np.roots(den)) == pytest.approx([0.5 / q] * 2, rel=1e-6)  # the reference pair
        poles, _ = closed_loop_poles(f, 0.5 * w0**2 / np.polyval(den, s), nyquist_rhp=0)
        assert len(poles.open_loop_rhp_poles_rad_s) == read, q
