"""Documented outcomes: band-pass loops, noise floor, no crossover, positive feedback, bad data, integrators."""

from __future__ import annotations

import math

import control
import numpy as np
import pytest
from analysis_loops import sample

from netloop.analysis import analyse
from netloop.errors import AnalysisError

TWO_PI = 2.0 * math.pi
S = control.tf("s")
THREE_POLE = control.tf([25], [1, 10, 10, 10])


def test_band_pass_low_crossing_is_not_a_bogus_negative_margin():
    """An AC-coupled loop's low crossing has PM = 180 - phase (positive), where wrapping gives python-control's -PM."""
    loop = 10 * S / (S + 1e-3) / (S + 1) / (S / 10 + 1)
    a = analyse(*sample(loop, 1e-7, 1e4))
    low, high = a.gain_crossovers
    assert (low.direction, high.direction) == ("up", "down")
    _, pm, _, _, w_gc, _ = control.stability_margins(loop, returnall=True)  # python-control 0.10
    # python-control wraps the low crossing's phase (about +95.7 deg) into -84.3 - 180 ... = -95.7
    assert pm[0] < 0 and low.phase_margin_deg == pytest.approx(-pm[0], abs=1e-3)
    assert low.freq_hz * TWO_PI == pytest.approx(w_gc[0], rel=1e-6)
    # closed form: at the low crossing the phase is 90 - atan(w/1e-3) - atan(w) - atan(w/10) deg
    w = w_gc[0]
    phase = 90 - math.degrees(math.atan(w / 1e-3) + math.atan(w) + math.atan(w / 10))
    assert low.phase_deg == pytest.approx(phase, abs=1e-3) and low.phase_margin_deg == pytest.approx(180 - phase, abs=1e-3)
    assert high.phase_margin_deg == pytest.approx(pm[1], abs=1e-3)
    assert a.margins.phase_margin_deg == pytest.approx(pm[1], abs=1e-3)  # the worst is the real crossover
    assert a.nyquist.origin_poles == -1 and a.nyquist.reliable and a.stable
    # numpy.roots of the characteristic polynomial: den + num
    num = np.array([10.0, 0, 0, 0])
    den = np.polymul(np.polymul([1, 1e-3], [1, 1]), [0.1, 1])
    assert int(np.sum(np.roots(den + num).real > 0)) == 0


def test_noise_floor_crossings_are_ignored_and_counted():
    """Phase crossings where |T| sinks into simulated noise (-180 dB) are counted as ignored and change no margin."""
    f, t = sample(THREE_POLE, 1e-4, 1e6)
    clean = analyse(f, t)
    rng = np.random.default_rng(11)
    noisy_t = t + 1e-9 * (rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size))
    noisy = analyse(f, noisy_t)
    assert len(clean.ignored_phase_crossovers) == 0
    assert len(noisy.ignored_phase_crossovers) > 0
    assert all(c.gain_db < noisy.floor_db for c in noisy.ignored_phase_crossovers)
    assert noisy.phase_crossovers == clean.phase_crossovers or len(noisy.phase_crossovers) == 1
    assert noisy.margins.gain_margin_db == pytest.approx(20 * math.log10(3.6), abs=1e-4)  # python-control: GM 3.6
    assert noisy.margins.phase_margin_deg == pytest.approx(clean.margins.phase_margin_deg, abs=1e-4)
    assert noisy.nyquist.reliable and noisy.stable
    assert noisy.poles is not None and noisy.poles.rhp_count == 0 and noisy.poles.agrees_with_nyquist
    assert any("ignored" in w for w in noisy.warnings)
    # raising the floor above the real crossover's -11 dB would ignore it too: the floor is a true threshold
    assert analyse(f, noisy_t, floor_db=-5.0, fit_poles=False).margins.gain_margin_db is None


def test_no_crossover_has_one_meaning():
    """'No crossover' means gain_crossovers == () and phase margin, unity-gain frequency and delay margin None."""
    below = analyse(*sample(0.5 / (S + 1) ** 2, 1e-3, 1e3))
    above = analyse(*sample(1e3 / (S + 1), 1e-3, 1e1))
    for a in (below, above):
        assert a.gain_crossovers == ()
        assert (a.margins.phase_margin_deg, a.margins.unity_gain_hz, a.margins.delay_margin_s) == (None, None, None)
        assert a.second_order is None
    # always below: "does not regulate", with its DC loop gain; stable by Nyquist and by numpy.roots of s^2+2s+1.5
    assert not below.regulates and below.classification == "does not regulate"
    assert below.dc_gain_db == pytest.approx(20 * math.log10(0.5), abs=1e-3)  # |T| at 1e-3 Hz, 3e-4 dB under DC
    assert below.stable and below.nyquist.reliable
    # always above: it regulates, but the sweep ends before |T| < 1, so the count is not reliable
    assert above.regulates and not above.nyquist.reliable
    assert any("before the loop gain falls below 1" in r for r in above.nyquist.reasons)


def test_sweep_that_stops_between_crossovers_is_flagged():
    """A sweep ending while |T| > 1 keeps the crossovers it saw but marks the verdict unreliable."""
    loop = 10 * S / (S + 1e-3) / (S + 1) / (S / 10 + 1)
    a = analyse(*sample(loop, 1e-7, 1.0))  # stops before the real crossover near 7.8 rad/s
    assert [c.direction for c in a.gain_crossovers] == ["up"]
    assert not a.nyquist.reliable and a.warnings


@pytest.mark.parametrize("gain,expected_rhp", [(5.0, 1), (0.5, 0)])
def test_positive_feedback_at_dc(gain, expected_rhp):
    """T = -K/(s+1): a DC phase crossover at 0 Hz with |T(0)|, and Z from Nyquist equal to numpy.roots of s+1-K."""
    a = analyse(*sample(-gain / (S + 1), 1e-4, 1e4))
    assert any("positive feedback at DC" in w for w in a.warnings)
    dc = a.phase_crossovers[0]
    assert dc.freq_hz == 0.0 and dc.gain_db == pytest.approx(20 * math.log10(gain), abs=1e-5)  # read at 1e-4 Hz
    assert int(np.sum(np.roots([1, 1 - gain]).real > 0)) == expected_rhp
    assert a.nyquist.closed_loop_rhp_poles == expected_rhp and a.nyquist.reliable
    if expected_rhp == 0:
        # python-control 0.10 reports GM = 2 at w = 0 for -0.5/(s+1)
        gm, _, _, w_pc, _, _ = control.stability_margins(-gain / (S + 1))
        assert a.margins.gain_margin_db == pytest.approx(20 * math.log10(gm), abs=1e-5) and w_pc == 0.0


def test_open_loop_rhp_pole_counts_in_the_verdict():
    """T = K/(s-1) with P = 1: stable iff K > 1 (numpy.roots of s - 1 + K); the lower GM is 20 log10 K."""
    stable = analyse(*sample(2 / (S - 1), 1e-4, 1e4), open_loop_rhp_poles=1)
    unstable = analyse(*sample(0.5 / (S - 1), 1e-4, 1e4), open_loop_rhp_poles=1)
    assert stable.nyquist.encirclements == -1 and stable.stable
    assert stable.margins.lower_gain_margin_db == pytest.approx(20 * math.log10(2), abs=1e-5)  # read at 1e-4 Hz
    assert unstable.nyquist.closed_loop_rhp_poles == 1 and not unstable.stable
    assert unstable.classification == "unstable"
    assert stable.poles.rhp_count == 0 and unstable.poles.rhp_count == 1


@pytest.mark.parametrize("bad", [np.nan, np.inf])
def test_nan_or_infinite_samples_raise_analysis_error(bad):
    """NaN or infinite T is rejected with AnalysisError naming the first bad frequency (never dropped)."""
    f, t = sample(THREE_POLE, 1e-2, 1e2)
    t[7] = bad
    with pytest.raises(AnalysisError, match=r"1 NaN or infinite sample\(s\), the first at 0\.0\d+ Hz"):
        analyse(f, t)


@pytest.mark.parametrize(
    "freq,t,message",
    [
        ([1, 2, 3], [1, 1, 1], r"^need at least 4 frequency samples to analyse a loop, got 3$"),
        ([1, 3, 2, 4], [1, 1, 1, 1], r"^frequencies must be strictly ascending: sample 2 \(2 Hz\) follows 3 Hz$"),
        ([1, 2, 2, 3], [1, 1, 1, 1], r"^frequencies must be strictly ascending: sample 2 \(2 Hz\) follows 2 Hz$"),  # a repeat
        ([0, 1, 2, 3], [1, 1, 1, 1], r"^frequencies must be finite and positive \(Hz\)$"),
        ([1, 2, float("inf"), 4], [1, 1, 1, 1], r"^frequencies must be finite and positive \(Hz\)$"),
        ([1, 2, 3, 4], [1, 1, 1], r"^freq_hz has 4 samples but T has 3; expected one T per frequency$"),
        ([[1, 2], [3, 4]], [[1, 1], [1, 1]], r"^expected one-dimensional arrays, got freq_hz of shape \(2, 2\) and T of shape \(2, 2\)$"),
        ([1, 2, 3, 4], [[1], [1], [1], [1]], r"^expected one-dimensional arrays, got freq_hz of shape \(4,\) and T of shape \(4, 1\)$"),
        (["1", "2", "x", "4"], [1, 1, 1, 1], r"^frequencies must be real numbers in Hz: "),
        ([1, 2, 3, 4], [1, 1, "x", 1], r"^the return ratio T must be complex numbers: "),
    ],
)
def test_malformed_data_says_what_was_expected(freq, t, message):
    """Malformed arrays raise AnalysisError with one message that names the fault and what was expected (house rule on bad input)."""
    with pytest.raises(AnalysisError, match=message):
        analyse(freq, t)


@pytest.mark.parametrize("origin_poles", [1, 2])
def test_integrators_handled_at_the_bottom(origin_poles):
    """Loops with 1 or 2 poles at DC: the detour right of s = 0 gives the verdict of numpy.roots of den + num."""
    if origin_poles == 1:
        num, den = [2.0], [1.0, 1.0, 0.0]  # 2 / (s (s + 1)): stable
    else:
        num, den = [1.0, 0.5], [0.1, 1.0, 0.0, 0.0]  # (s + 0.5) / (s^2 (0.1 s + 1)): stable (Routh)
    loop = control.tf(num, den)
    a = analyse(*sample(loop, 1e-4, 1e4))
    rhp = int(np.sum(np.roots(np.polyadd(den, num)).real > 0))
    assert a.nyquist.origin_poles == origin_poles and a.nyquist.reliable
    assert a.nyquist.closed_loop_rhp_poles == rhp == 0
    _, pm, _, _, _, _ = control.stability_margins(loop)  # python-control 0.10
    assert a.margins.phase_margin_deg == pytest.approx(pm, abs=1e-3)


def test_double_integrator_unstable_variant():
    """1/(s^2 (s+1)) is unstable (numpy.roots of s^3+s^2+1 has 2 RHP roots) and the count says so."""
    loop = 1 / (S**2 * (S + 1))
    a = analyse(*sample(loop, 1e-4, 1e4))
    assert int(np.sum(np.roots([1, 1, 0, 1]).real > 0)) == 2
    assert a.nyquist.closed_loop_rhp_poles == 2 and a.nyquist.reliable and not a.stable


def test_coarse_data_is_reported_not_guessed():
    """At 2 points per decade near a sharp resonance the count is flagged unreliable with a reason."""
    loop = 2 / (S * (S / 10 + 1) * (S**2 / 1.5**2 + 2 * 0.02 * S / 1.5 + 1))
    a = analyse(*sample(loop, 1e-3, 1e4, per_decade=2), fit_poles=False)
    assert not a.nyquist.reliable
    assert any("more densely" in r for r in a.nyquist.reasons)


def test_unsettled_bottom_is_reported():
    """A sweep that starts on a pole (phase still moving) is flagged: T is not settled at the bottom."""
    a = analyse(*sample(THREE_POLE, 0.2, 1e3), fit_poles=False)
    assert not a.nyquist.reliable
    assert any("not settled at the bottom" in r for r in a.nyquist.reasons)


def test_sweep_top_not_far_below_unity_is_flagged():
    """Ending where |T| is -14.5 dB (above the -20 dB limit) makes the count unreliable, with the level in the reason."""
    a = analyse(*sample(THREE_POLE, 1e-4, 0.6), fit_poles=False)
    assert a.gain_crossovers  # the crossover itself is inside the sweep
    assert not a.nyquist.reliable
    assert any("not far below 1" in r for r in a.nyquist.reasons)
    assert analyse(*sample(THREE_POLE, 1e-4, 3.0), fit_poles=False).nyquist.reliable  # -48 dB at 3 Hz


def test_loop_through_minus_one_is_marginal_not_a_crash():
    """T = 8/(s+1)^3 sampled exactly where T = -1 (w = sqrt 3, closed form): PM 0, infinite peaking, count unreliable, no pole fit."""
    loop = 8 / (S + 1) ** 3  # (1 + j sqrt3)^3 = -8, so T(j sqrt3) = -1 (our derivation)
    f = np.sort(np.append(np.logspace(-3, 3, 121), math.sqrt(3) / TWO_PI))
    t = loop(2j * np.pi * f)
    t[np.argmin(np.abs(f - math.sqrt(3) / TWO_PI))] = -1.0
    a = analyse(f, t)
    assert a.margins.phase_margin_deg == pytest.approx(0.0, abs=1e-9)
    assert a.gain_crossovers[0].peaking_exact == math.inf and a.gain_crossovers[0].delay_margin_s is None
    assert a.margins.modulus_margin < 1e-12
    assert not a.nyquist.reliable and a.poles is None
    assert any("equals -1" in w for w in a.warnings)


def test_unsettled_bottom_claims_no_dc_feedback_sign():
    """A sweep starting mid-way down the three-pole phase (about -100 deg) claims neither positive feedback nor a DC crossover."""
    a = analyse(*sample(THREE_POLE, 0.2, 1e3), fit_poles=False)
    assert abs(math.degrees(np.angle(a.t[0]))) > 90  # nearer 180 than 0, yet T(0) = 2.5 > 0
    assert not any("positive feedback" in w for w in a.warnings)
    assert all(c.freq_hz > 0 for c in a.phase_crossovers)


@pytest.mark.parametrize("loop, lo_hz, is_dc", [
    (100 / (S + 1), 1e-4, True),  # swept three decades below its pole: flat, phase -0.04 deg
    (100 / (S / (TWO_PI * 1e-3) + 1), 1e-4, True),  # pole a decade above the bottom: -0.04 dB/decade, -5.7 deg
    (100 / (S / (TWO_PI * 1e-4) + 1), 1e-4, False),  # pole at the bottom: -3 dB/decade, -45 deg
    (100 / (S + 1), 10.0, False),  # swept above its pole: -20 dB/decade
    (-100 / (S + 1), 1e-4, True),  # positive feedback at DC: flat, on the negative real axis
    (100 / S / (S / 10 + 1), 1e-4, False),  # an integrator: no DC gain at all
    (100 * S / (S + TWO_PI * 1e-5) / (S / 10 + 1), 1e-4, False),  # AC coupling a decade below the bottom: +5.7 deg of lead
])
def test_gain_at_the_bottom_stands_for_dc_only_when_t_is_flat_there(loop, lo_hz, is_dc):
    """|T| at the lowest frequency is the DC loop gain only without integrators, with T flat there (closed forms of a single
    pole p at f: slope and phase -atan(f/p); a pole a decade above the bottom leaves -0.04 dB/decade and -5.7 deg, one at the
    bottom -3 dB/decade and -45 deg) and without an AC coupling's lead (atan(10) - 90 = +5.7 deg a decade above its zero)."""
    a = analyse(*sample(loop, lo_hz, 1e4), fit_poles=False)
    assert a.gain_is_dc is is_dc


def _db(loop, f_hz: float) -> float:
    """20 log10 |L(j 2 pi f)| of a python-control transfer function (the closed form the messages quote)."""
    return 20 * math.log10(abs(complex(loop(TWO_PI * 1j * f_hz))))


def test_warnings_quote_their_figures():
    """Each documented warning is one sentence carrying its figure, here equal to the closed form of the loop it is about:
    the most |T| reaches for a loop that does not regulate; |T| at the top of a sweep ended too early; the AC coupling
    whose crossover lies below the sweep; positive feedback at DC."""
    weak = 0.5 / (S + 1) ** 2
    a = analyse(*sample(weak, 1e-3, 1e3), fit_poles=False)
    assert f"the loop gain never reaches 0 dB (at most {_db(weak, 1e-3):.4g} dB): the loop does not regulate" in a.warnings
    early = 100 / (S + 1)
    a = analyse(*sample(early, 1e-3, 1e2), fit_poles=False)
    assert (f"|T| at the top of the sweep ({_db(early, 1e2):.3g} dB at 100 Hz) is not far below 1; extend the sweep until "
            "it is under -20 dB") in a.warnings
    coupled = 1e4 * S / (S / 1e3 + 1) ** 2
    a = analyse(*sample(coupled, 1e-3, 1e5), fit_poles=False)
    assert "|T| is above 1 at 0.001 Hz but falls toward DC (AC coupling): a crossover lies below the sweep" in a.warnings
    assert _db(coupled, 1e-3) > 0  # closed form: 1e4 * 2 pi 1e-3 = 63 at the bottom
    a = analyse(*sample(-5 / (S + 1), 1e-4, 1e4), fit_poles=False)
    assert math.degrees(np.angle(a.t[0])) > 179  # T(0) = -5: numpy's angle +180 deg, with |T| > 1 at the bottom
    assert a.warnings == ("T is negative at low frequency: positive feedback at DC",)  # not read as an AC coupling's lead


@pytest.mark.parametrize("p", [-1, 1.5])
def test_a_given_p_must_be_a_count(p):
    """P, the open-loop right-half-plane pole count given by the caller, is a whole number >= 0 (a count of poles); anything
    else is refused with what was expected."""
    with pytest.raises(AnalysisError, match=rf"^open_loop_rhp_poles must be a whole number >= 0, got {p!r}$"):
        analyse(*sample(THREE_POLE, 1e-2, 1e2), open_loop_rhp_poles=p)
    assert analyse(*sample(THREE_POLE, 1e-2, 1e2), open_loop_rhp_poles=2.0, fit_poles=False).nyquist.open_loop_rhp_poles == 2


def test_peaking_of_a_loop_below_unity_is_measured_from_0_db():
    """With |T| < 1 at the bottom there is no regulated level: peaking is |T/(1+T)| itself, from 0 dB. For
    T = 0.5/(s+1)^2, |T/(1+T)|^2 = 0.25/(2.25 + w^2 + w^4) (closed form) is largest at DC (1/3, -9.54 dB), so over the sweep at its bottom."""
    a = analyse(*sample(0.5 / (S + 1) ** 2, 1e-3, 1e3), fit_poles=False)
    assert a.peaking.reference_db == 0.0
    w = TWO_PI * 1e-3  # the bottom of the sweep, where the sampled curve is largest
    assert a.peaking.peak_db == a.peaking.absolute_peak_db == pytest.approx(10 * math.log10(0.25 / (2.25 + w**2 + w**4)), abs=1e-6)
    assert a.peaking.peak_freq_hz == pytest.approx(1e-3, rel=1e-6)  # the bottom of the sweep


@pytest.mark.parametrize("fz_hz, bottom", [(30.0, 1.02), (30.0, 1.05), (10.0, 1.1)])
def test_a_double_integrator_swept_from_just_above_its_crossing_counts_a_closed_contour(fz_hz, bottom):
    """T = (w0/s)^2 (1 + s/wz)/(1 + s/wp) with |T| just above 1 at the bottom (1 Hz): the detour below the sweep turns T
    once around at |T(1 Hz)|, passing just outside -1, and meets the data where it starts, so the angle of 1 + T closes
    to a whole number of turns (the argument principle) and the count is reliable, with Z = N + P = 0 as numpy.roots of
    the characteristic polynomial s^2 (1 + s/wp) + w0^2 (1 + s/wz) gives (P = 0: the integrators sit on the detour's left)."""
    w0, wz, wp = TWO_PI * math.sqrt(bottom), TWO_PI * fz_hz, TWO_PI * 1e3
    f = np.logspace(0, 5, 101)
    s = 2j * np.pi * f
    a = analyse(f, (w0 / s) ** 2 * (1 + s / wz) / (1 + s / wp), fit_poles=False)
    char = np.polyadd(np.polymul([1 / wp, 1.0], [1.0, 0.0, 0.0]), [w0**2 / wz, w0**2])
    assert a.nyquist.origin_poles == 2 and a.nyquist.reliable and a.nyquist.reasons == ()
    assert a.nyquist.closed_loop_rhp_poles == int(np.sum(np.roots(char).real > 0)) == 0
