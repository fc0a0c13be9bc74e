"""A doubtful Nyquist count's self-check advises exactly what its reasons ask for: a lower start, denser samples, or both."""

from __future__ import annotations

import control
import numpy as np
import pytest
from analysis_loops import sample

from netloop.analysis import analyse
from netloop.analysis.checks import nyquist_checks
from netloop.analysis.results import NyquistVerdict

S = control.tf("s")
LOWER = "let the sweep start lower (drop --fmin, or lower it)"
DENSER = "sample more densely (raise --ppd)"


@pytest.mark.parametrize(
    "loop, lo_hz, ppd, words, advice",
    [
        # the sweep starts on a pole at 0.01 Hz: the bottom is not settled (slope -10 dB/decade, phase -45 deg, closed form)
        (100 / (S / (2 * np.pi * 1e-2) + 1) / (S / 10 + 1), 1e-2, 20, ("not settled",), LOWER),
        # an integrator with |T| = 0.01/(2 pi 0.01) = 0.16 at the bottom: its crossover lies below the sweep (closed form)
        (0.01 / S / (S / 10 + 1), 1e-2, 20, ("integrator",), LOWER),
        # a zero at the origin with |T| = 1e3 * 2 pi 0.01 = 63 at the bottom: AC coupling, its crossover lies below the sweep
        (1e3 * S / (S / 10 + 1) ** 3, 1e-2, 20, ("AC coupling",), LOWER),
        # a resonance of Q = 500 at 1.6 Hz sampled 2 points a decade: T's phase turns 180 deg between two samples
        (1e4 / (S**2 / 100 + 0.002 * S + 1) / (S / 1e3 + 1), 1e-2, 2, ("steps by more than",), DENSER),
        # both at once: the resonance, and the sweep starting on a pole
        (1e4 / (S**2 / 100 + 0.002 * S + 1) / (S / 1e3 + 1) / (S / (2 * np.pi * 1e-2) + 1), 1e-2, 2,
         ("steps by more than", "not settled"), f"{LOWER}; {DENSER}"),
    ],
)
def test_advice_follows_the_reasons_of_a_measured_loop(loop, lo_hz, ppd, words, advice):
    """Each doubt a sampled loop raises (closed forms beside each case) gets the option that removes it, each tip once, in one
    order: a lower --fmin for the bottom of the sweep, a higher --ppd for coarse data (common practice)."""
    a = analyse(*sample(loop, lo_hz, 1e5, per_decade=ppd), fit_poles=False)
    (check,) = [c for c in a.checks if c.name == "nyquist-data"]
    assert not check.passed
    assert all(any(w in r for r in a.nyquist.reasons) for w in words)
    assert check.advice == advice


def _verdict(*reasons: str) -> NyquistVerdict:
    return NyquistVerdict(0, 0, 0, True, not reasons, reasons, 0)


@pytest.mark.parametrize(
    "reasons, advice",
    [
        (("the angle of 1 + T does not close to a whole number of turns (0.500)",), DENSER),
        (("the angle of 1 + T jumps by more than 90 deg between neighbouring points near 10 Hz: T passes too close to -1 to "
          "count safely; sample more densely there",), DENSER),
        (("below the sweep (from 1 Hz down) T passes within 0.01 of -1, closer than its low-frequency asymptote can be trusted; "
          "start the sweep lower",), LOWER),
        (("a doubt no rule here knows",), "widen the sweep and raise --ppd"),
        ((), ""),
    ],
)
def test_advice_for_each_reason_nyquist_gives(reasons, advice):
    """The reasons netloop.analysis.nyquist writes (the wording of its sentences), one at a time, get the tip their own
    last words ask for; a reason no rule knows gets the general advice, and a reliable count none."""
    (data, _) = nyquist_checks(_verdict(*reasons))
    assert data.passed == (not reasons)
    assert data.advice == advice
