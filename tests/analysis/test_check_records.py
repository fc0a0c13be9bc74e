"""The passing checks as a report shows them: each check's name and its sentence, word for word, from closed-form loops."""

from __future__ import annotations

import control
import numpy as np
import pytest
from analysis_loops import sample

from netloop.analysis import analyse

S = control.tf("s")
TWO_POLE = 100.0 / ((S + 1) * (S / 100 + 1))  # stable blocks, one gain crossover, P = 0 (python-control: control.poles)


def _checks(a):
    return {c.name: c for c in a.checks}


@pytest.mark.parametrize("given, said", [(None, "read from the data"), (0, "given")])
def test_a_stable_loop_passes_each_check_with_its_own_words(given, said):
    """A two-pole loop swept from 1e-5 to 1e5 Hz passes loop-present, falls-at-top, nyquist-data and rhp-count, each named
    and worded as docs/splitting.md lists them; the numbers in the words are the closed form's (python-control evaluates
    |T| at the top of the sweep), and P is said to be read from the data or given."""
    f, t = sample(TWO_POLE, 1e-5, 1e5)
    a = analyse(f, t) if given is None else analyse(f, t, open_loop_rhp_poles=given)
    checks = _checks(a)
    assert all(c.passed for c in a.checks)
    top_db = 20 * np.log10(abs(complex(TWO_POLE(2j * np.pi * 1e5))))  # reference: python-control's evaluation of T
    assert checks["falls-at-top"].detail == f"|T| falls to {top_db:.4g} dB at the top of the sweep ({1e5:.4g} Hz)"
    assert checks["loop-present"].detail == f"|T| reaches {20 * np.log10(abs(t).max()):.4g} dB"
    assert checks["nyquist-data"].detail == "the sweep covers the loop: the Nyquist count is reliable"
    assert checks["rhp-count"].detail == f"Z = N + P = 0 + 0 = 0 (P {said})"


def test_a_sweep_cut_at_the_crossover_closes_to_whole_turns():
    """T = 5/(s+1)^3 swept only up to just below its gain crossover (1.387 rad/s, where T = 1 at -162.6 deg) is doubted for the top
    alone: closed along the mirror image and the short way between 1 + T's last sample and its conjugate, the angle of
    1 + T still makes whole turns (the argument principle behind the Nyquist criterion), and N = 0 as for the whole loop,
    which python-control calls stable (gain margin 8/5 > 1)."""
    loop = 5.0 / (S + 1) ** 3
    w_c = np.sqrt(5.0 ** (2.0 / 3.0) - 1.0)  # |T(j w_c)| = 1
    assert control.stability_margins(loop)[0] == pytest.approx(8.0 / 5.0)  # reference: python-control
    f, t = sample(loop, 1e-4, 0.99 * w_c / (2 * np.pi))  # just below the crossover: |T| a hair above 1
    a = analyse(f, t)
    assert a.nyquist.encirclements == 0
    assert a.nyquist.reasons == (f"the sweep ends at {f[-1]:.4g} Hz before the loop gain falls below 1 ({20 * np.log10(abs(t[-1])):.3g} dB)",)
