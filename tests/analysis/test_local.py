"""Readings from short sweeps around a loop's crossovers equal the whole analysis (closed-form loops, no simulator)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from netloop.analysis import analyse
from netloop.analysis.local import read_windows, reading_of, windows_of


def three_pole(f, p2_hz: float = 1e6, gain: float = 1000.0) -> np.ndarray:
    """T(s) = A / ((1 + s/p1)(1 + s/p2)(1 + s/p3)): circuit theory, three real poles (1 kHz, p2, 3 MHz)."""
    s = 2j * np.pi * np.asarray(f, dtype=float)
    return gain / ((1 + s / (2 * np.pi * 1e3)) * (1 + s / (2 * np.pi * p2_hz)) * (1 + s / (2 * np.pi * 3e6)))


F = np.logspace(0, 9, 181)  # 20 points per decade


def _samples(windows, p2_hz: float):
    f = np.unique(np.concatenate([np.linspace(w.fstart_hz, w.fstop_hz, w.points) for w in windows]))
    return f, three_pole(f, p2_hz)


def test_windows_of_the_measured_loop_read_its_analysis():
    """Read from its own windows, the unchanged loop gives the whole analysis's PM, fc, GM and peaking."""
    a = analyse(F, three_pole(F))
    windows = windows_of(a)
    assert [w.gain_crossovers for w in windows if w.points > 1] == [1, 0] and [w.peak for w in windows] == [False, False, True, False]
    got = read_windows(windows, *_samples(windows, 1e6), stable=a.nyquist.stable, floor_db=a.floor_db)
    want = reading_of(a)
    assert got.problem is None
    assert got.phase_margin_deg == pytest.approx(want.phase_margin_deg, abs=1e-6)
    assert got.unity_gain_hz == pytest.approx(want.unity_gain_hz, rel=1e-8)
    assert got.gain_margin_db == pytest.approx(want.gain_margin_db, abs=1e-6)
    assert got.peak_db == pytest.approx(want.peak_db, abs=1e-6)


def test_a_changed_loop_read_from_windows_equals_its_whole_analysis():
    """After a 2 % change of the second pole the windows give the changed loop's own PM, fc and GM."""
    a = analyse(F, three_pole(F))
    windows = windows_of(a)
    got = read_windows(windows, *_samples(windows, 1.02e6), stable=True, floor_db=a.floor_db)
    want = reading_of(analyse(F, three_pole(F, 1.02e6)))
    assert got.phase_margin_deg == pytest.approx(want.phase_margin_deg, abs=1e-5)
    assert got.unity_gain_hz == pytest.approx(want.unity_gain_hz, rel=1e-7)
    assert got.gain_margin_db == pytest.approx(want.gain_margin_db, abs=1e-5)


def test_peaking_at_the_measured_peak_has_the_slope_of_the_peak():
    """The level of |T/(1+T)| at the measured peak's frequency moves, to first order, as the peak itself does: central
    differences of the two agree (the peak's own shift changes its height only at second order, evenly)."""
    a = analyse(F, three_pole(F))
    windows = windows_of(a)
    h = 0.01
    window_peak = [read_windows(windows, *_samples(windows, 1e6 * math.exp(k * h)), stable=True, floor_db=-120).peak_db for k in (1, -1)]
    dense = np.logspace(0, 9, 721)  # the whole analysis of each changed loop, sampled densely so its peak search is exact
    true_peak = [analyse(dense, three_pole(dense, 1e6 * math.exp(k * h))).peaking.peak_db for k in (1, -1)]
    assert (window_peak[0] - window_peak[1]) == pytest.approx(true_peak[0] - true_peak[1], rel=1e-3)


def test_a_crossover_that_leaves_its_window_is_flagged():
    """A change that moves the gain crossover out of its window gives no figures and says why."""
    a = analyse(F, three_pole(F))
    windows = windows_of(a)
    f = np.unique(np.concatenate([np.linspace(w.fstart_hz, w.fstop_hz, w.points) for w in windows]))
    got = read_windows(windows, f, three_pole(f, gain=1300.0), stable=True, floor_db=a.floor_db)
    assert got.problem is not None and "gain crossover" in got.problem
    assert got.phase_margin_deg is None


def test_a_loop_without_crossover_has_no_windows():
    """A loop that never reaches 0 dB has nothing to follow: no windows (the caller measures whole sweeps)."""
    assert windows_of(analyse(F, three_pole(F, gain=0.5))) == ()


def test_a_reading_the_windows_cannot_support_says_why():
    """Windows read from samples that cannot carry the figures fail with the reason and the window's edges, never with
    numbers: no sample at the bottom or at the peak, fewer than 4 samples in a window, or a window holding another number
    of crossovers than the measured loop had there (a second pole moved 30-fold, three-pole closed form)."""
    a = analyse(F, three_pole(F))
    windows = windows_of(a)
    f, t = _samples(windows, 1e6)
    crossing, peak, bottom = windows[0], windows[2], windows[3]
    read = lambda keep, tt=None: read_windows(windows, f[keep], (t if tt is None else tt)[keep], stable=True, floor_db=-120).problem  # noqa: E731
    assert read(~bottom.holds(f)) == "no sample at the bottom of the sweep"
    assert read(~peak.holds(f)) == f"no sample at the closed-loop peak ({peak.fstart_hz:.6g} Hz)"
    sparse = ~crossing.holds(f) | (np.cumsum(crossing.holds(f)) <= 3)
    assert read(sparse) == f"fewer than 4 samples between {crossing.fstart_hz:.6g} and {crossing.fstop_hz:.6g} Hz"
    everywhere = np.ones(f.size, dtype=bool)
    moved = three_pole(f, 3e7)  # the loop's crossover leaves the window (and GM's phase crossover moves up)
    assert read(everywhere, moved) == (f"0 gain crossover(s) between {crossing.fstart_hz:.6g} and {crossing.fstop_hz:.6g} Hz, "
                                       "where the measured loop had 1")
    assert read_windows(windows, f, t, stable=True, floor_db=-120).problem is None
