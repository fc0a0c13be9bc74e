"""The data's own checks: P read from a rational fit of T, a T that measured no loop, a T that never falls."""

from __future__ import annotations

import control
import numpy as np
import pytest
from analysis_loops import closed_loop_rhp_roots, poly_loop, sample

from netloop.analysis import analyse
from netloop.analysis.checks import NEGLIGIBLE_DB

S = control.tf("s")


@pytest.mark.parametrize("k, stable", [(30.0, True), (0.5, False)])
def test_open_loop_rhp_poles_are_read_from_the_data(k, stable):
    """T = k/((s - 1)(s/10 + 1)) has one RHP pole: the fit finds P = 1 by itself, and Z = N + P equals numpy.roots of the closed loop."""
    num, den = [k], np.polymul([1.0, -1.0], [0.1, 1.0])
    a = analyse(*sample(poly_loop(num, den), 1e-4, 1e4))
    assert a.nyquist.open_loop_rhp_poles == 1 and a.nyquist.open_loop_rhp_from == "fit"
    assert a.poles.open_loop_rhp_poles_rad_s == pytest.approx((1.0,), rel=1e-6)  # the pole of T at s = +1 rad/s
    assert a.nyquist.closed_loop_rhp_poles == closed_loop_rhp_roots(num, den)  # reference: numpy.roots of den + num
    assert a.stable is stable
    assert all(c.passed for c in a.checks)


def test_a_given_p_overrides_the_fit():
    """open_loop_rhp_poles= is an override: the count given is used as it is, and said to be given."""
    a = analyse(*sample(30.0 / ((S - 1) * (S / 10 + 1)), 1e-4, 1e4), open_loop_rhp_poles=0)
    assert a.nyquist.open_loop_rhp_poles == 0 and a.nyquist.open_loop_rhp_from == "given"
    assert a.nyquist.closed_loop_rhp_poles == -1
    assert [c.name for c in a.checks if not c.passed] == ["rhp-count"] and a.classification == "inconclusive"


@pytest.mark.parametrize("loop", [100.0 / ((S + 1) * (S / 100 + 1)), 1e4 * (S / 10 + 1) ** 2 / ((S + 1e-3) * (S / 0.1 + 1) * (S + 1) * (S / 100 + 1) ** 2)])
def test_stable_blocks_give_p_zero(loop):
    """Loops made of stable blocks (a two-pole loop, a conditionally stable one) read P = 0 from their data, as python-control's poles say."""
    a = analyse(*sample(loop, 1e-5, 1e5))
    assert int(np.sum(np.real(control.poles(loop)) > 0)) == 0  # reference: python-control
    assert a.nyquist.open_loop_rhp_poles == 0 and a.nyquist.open_loop_rhp_from == "fit" and a.stable


def test_a_negligible_t_is_inconclusive_not_a_pass():
    """A T below -60 dB everywhere measured no loop: the check loop-present fails and the verdict is inconclusive, never 'does not regulate'."""
    a = analyse(*sample(1e-4 / (S + 1), 1e-4, 1e4))
    (failed,) = [c for c in a.checks if not c.passed]
    assert failed.name == "loop-present" and f"{NEGLIGIBLE_DB:g} dB" in failed.detail and "--driver" in failed.advice
    assert a.classification == "inconclusive"
    weak = analyse(*sample(0.5 / (S + 1), 1e-4, 1e4))  # a weak loop that does not regulate is not "no loop"
    assert all(c.passed for c in weak.checks) and weak.classification == "does not regulate"


def test_a_t_that_levels_off_fails_falls_at_top():
    """T = 5 (s/10 + 1)/(s + 1) tends to 0.5 (-6 dB): |T| never falls, and the check falls-at-top fails with the path-around-the-probe reason."""
    a = analyse(*sample(5.0 * (S / 10 + 1) / (S + 1), 1e-4, 1e4))
    failed = {c.name: c for c in a.checks if not c.passed}
    assert "falls-at-top" in failed and "path around the probe" in failed["falls-at-top"].detail
    assert "nyquist-data" not in failed  # the top of the sweep is falls-at-top's, said once
    assert a.classification == "inconclusive"


@pytest.mark.parametrize("loop, lo_hz, ppd, words, flag", [
    (100 / (S / (2 * np.pi * 1e-2) + 1) / (S / 10 + 1), 1e-2, 20, "start the sweep lower", "--fmin"),  # starts on a pole
    (0.01 / S / (S / 10 + 1), 1e-2, 20, "a crossover lies below the sweep", "--fmin"),  # integrator, |T| = 0.16 at the bottom
    (1e4 / (S**2 / 100 + 0.002 * S + 1) / (S / 1e3 + 1), 1e-2, 2, "sample more densely", "--ppd"),  # Q = 500, 2 per decade
])
def test_a_doubtful_count_says_what_to_change(loop, lo_hz, ppd, words, flag):
    """When the Nyquist count is doubtful, nyquist-data fails with every reason given, and its advice names the option
    that does what the reason asks (a lower --fmin for a bottom that is not settled, a higher --ppd for coarse data)."""
    a = analyse(*sample(loop, lo_hz, 1e5, per_decade=ppd), fit_poles=False)
    (check,) = [c for c in a.checks if c.name == "nyquist-data"]
    assert not check.passed and words in check.detail and flag in check.advice
    assert check.detail == "the Nyquist count is doubtful: " + "; ".join(r for r in a.nyquist.reasons if "top of the sweep" not in r and "the sweep ends at" not in r)
    assert a.classification == "inconclusive"


def test_the_rhp_count_check_shows_its_sum_and_where_p_came_from():
    """rhp-count shows Z = N + P with its terms and says where P came from: read from the data (the fit), given, or assumed
    0 without the fit; a negative Z (here T = 30/((s - 1)(s/10 + 1)), whose one RHP pole is told away) says P does not fit."""
    loop = 30.0 / ((S - 1) * (S / 10 + 1))  # N = -1 (one counter-clockwise turn), P = 1 (numpy.roots of the denominator)
    details = {}
    for how, kwargs in (("read from the data", {}), ("given", {"open_loop_rhp_poles": 1}), ("assumed", {"fit_poles": False})):
        (check,) = [c for c in analyse(*sample(loop, 1e-4, 1e4), **kwargs).checks if c.name == "rhp-count"]
        details[how] = (check.passed, check.detail)
    assert details["read from the data"] == (True, "Z = N + P = -1 + 1 = 0 (P read from the data)")
    assert details["given"] == (True, "Z = N + P = -1 + 1 = 0 (P given)")
    passed, detail = details["assumed"]
    assert not passed and detail == ("Z = N + P = -1 + 0 = -1 is negative, which no circuit has: P = 0 open-loop "
                                     "right-half-plane pole(s) (assumed) does not fit this data (the opened loop has unstable "
                                     "poles of its own that the data does not show, or the split leaves a path around the probe)")


@pytest.mark.parametrize("k, a, eps, b", [
    (30.0, 1.0, 0.01, 5.0),  # the doublet above T's other unstable pole
    (300.0, 10.0, 0.01, 2.0),  # the doublet below it
])
def test_a_fit_that_contradicts_its_own_p_is_inconclusive_not_stable(k, a, eps, b):
    """T = k/((s-a)(s/(10a)+1)) + eps/(s-b): its closed loop has a right-half-plane pole beside T's own pole at +b
    (numpy.roots of the characteristic polynomial: Z = 1, and P = 2 by construction). The fit drops that nearly
    cancelled pair as its own doublet and keeps T's pole at +a, so P read from it is 1 and N + P = 0, while the same fit
    finds 1 closed-loop RHP pole: the data supports no verdict (rhp-count fails, "inconclusive", with what to give),
    never "stable". With P = 2 given the Nyquist count gives Z = 1, "unstable", as numpy.roots does."""
    lag = [1.0 / (10.0 * a), 1.0]
    num = np.polyadd(np.polymul([k], [1.0, -b]), eps * np.polymul([1.0, -a], lag))  # over (s - a)(s/(10a) + 1)(s - b)
    den = np.polymul(np.polymul([1.0, -a], lag), [1.0, -b])
    assert closed_loop_rhp_roots(num, den) == 1
    f, t = sample(lambda s: np.polyval(num, s) / np.polyval(den, s), 1e-3, 1e3, per_decade=100)
    read = analyse(f, t)
    check = next(c for c in read.checks if c.name == "rhp-count")
    assert read.classification == "inconclusive" and not check.passed
    assert read.nyquist.open_loop_rhp_from == "fit" and read.nyquist.closed_loop_rhp_poles == 0 and read.poles.rhp_count == 1
    assert "contradicts itself" in check.detail and "--open-loop-rhp-poles" in check.advice
    # the fit reads T's pole at +a and sets aside the one at +b beside a closed-loop pole as its own pair (poles.py)
    assert np.allclose(read.poles.open_loop_rhp_poles_rad_s, [a], rtol=1e-6)
    given = analyse(f, t, open_loop_rhp_poles=2)
    assert given.classification == "unstable" and given.nyquist.closed_loop_rhp_poles == 1
    assert all(c.passed for c in given.checks)
