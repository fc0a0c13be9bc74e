"""Readings from short sweeps around a loop's crossovers equal the whole analysis (closed-form loops, no simulator)."""

from __future__ import annotations

import math
from dataclasses import replace

import control
import numpy as np
import pytest

from netloop.analysis import analyse
from netloop.analysis.crossovers import phase_margin_deg
from netloop.analysis.local import Window, read_windows, reading_of, windows_of


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


# ---- closed forms and boundaries the readings rest on ----


def three_pole_phase_deg(f, p2_hz: float = 1e6) -> np.ndarray:
    """The continuous phase of three_pole: -atan(f/1 kHz) - atan(f/p2) - atan(f/3 MHz), in degrees (circuit theory)."""
    f = np.asarray(f, dtype=float)
    return -np.degrees(np.arctan(f / 1e3) + np.arctan(f / p2_hz) + np.arctan(f / 3e6))


def type_three(f) -> np.ndarray:
    """T(s) = K (1 + s/wz)^2 / (s/wz)^3, wz = 2 pi 1 kHz: phase -270 + 2 atan(f / 1 kHz), so -180 at 1 kHz, and K puts
    |T| = 1 where the phase is -179 deg (circuit theory; a conditionally stable loop, stable for K > 1/2 by Routh)."""
    u = 1j * np.asarray(f, dtype=float) / 1e3
    wc = math.tan(math.radians(45.5))
    return wc**3 / (1 + wc**2) * (1 + u) ** 2 / u**3


def test_windows_span_each_crossover_and_anchor_on_the_closed_form_phase():
    """Each crossover window spans f exp(-+0.06) around it; each window's phase anchor is the closed-form continuous phase
    at its middle, at the peak and at the bottom of the sweep (three-pole closed form)."""
    a = analyse(F, three_pole(F))
    crossing, phase, peak, bottom = windows_of(a)
    for w, c in ((crossing, a.gain_crossovers[0]), (phase, a.phase_crossovers[0])):
        assert w.fstart_hz == pytest.approx(c.freq_hz * math.exp(-0.06), rel=1e-12)
        assert w.fstop_hz == pytest.approx(c.freq_hz * math.exp(0.06), rel=1e-12)
        assert w.phase_deg == pytest.approx(three_pole_phase_deg((w.fstart_hz + w.fstop_hz) / 2), abs=1e-4)
    assert (crossing.gain_crossovers, crossing.phase_crossovers, phase.gain_crossovers, phase.phase_crossovers) == (1, 0, 0, 1)
    assert peak.peak and peak.fstart_hz == peak.fstop_hz == a.peaking.peak_freq_hz and peak.points == 1
    assert peak.phase_deg == pytest.approx(three_pole_phase_deg(peak.fstart_hz), abs=1e-4)
    assert bottom.bottom and bottom.fstart_hz == bottom.fstop_hz == F[0] and bottom.points == 1
    assert bottom.phase_deg == pytest.approx(three_pole_phase_deg(F[0]), abs=1e-9)


@pytest.mark.parametrize("half_width", [0.02, 0.06, 0.2, 0.4, 0.5, 1.0])
def test_overlapping_windows_are_joined_with_proportionally_more_points(half_width):
    """Windows of crossovers less than exp(2 half_width) apart are one, from the lower one's start to the upper one's stop,
    with at least as many points per neper as one window and not one more than that needs (windows_of's docstring)."""
    a = analyse(F, three_pole(F))
    fc, fp = a.gain_crossovers[0].freq_hz, a.phase_crossovers[0].freq_hz
    windows = [w for w in windows_of(a, half_width=half_width) if w.points > 1]
    if fp / fc <= math.exp(2 * half_width):
        (w,) = windows
        assert (w.gain_crossovers, w.phase_crossovers) == (1, 1)
        assert (w.fstart_hz, w.fstop_hz) == pytest.approx((fc * math.exp(-half_width), fp * math.exp(half_width)), rel=1e-12)
    else:
        assert [(w.gain_crossovers, w.phase_crossovers) for w in windows] == [(1, 0), (0, 1)]
    for w in windows:
        needed = 8 * math.log(w.fstop_hz / w.fstart_hz) / (2 * half_width)  # 9 points (8 steps) per window width
        assert w.points - 1 >= needed - 1e-9 and w.points - 2 < needed and w.points >= 9


def test_windows_need_a_gain_crossover_and_no_phase_crossover_at_dc():
    """No windows for positive feedback at DC (a phase crossover at 0 Hz); windows for a loop whose crossovers all lie
    below 1 Hz (the three-pole closed form scaled down 1e7-fold)."""
    f = np.logspace(-3, 3, 121)
    dc = analyse(f, -10 / (1 + 1j * f))  # -10 / (1 + j f): T(0) = -10 (our own shape)
    assert dc.phase_crossovers[0].freq_hz == 0.0 and dc.gain_crossovers and windows_of(dc) == ()
    slow = analyse(F * 1e-7, three_pole(F))
    assert slow.phase_crossovers[0].freq_hz < 1.0
    assert [w.gain_crossovers + w.phase_crossovers for w in windows_of(slow) if w.points > 1] == [1, 1]


def test_a_reading_gives_python_controls_margins_and_phase_crossover():
    """Read from its windows, the three-pole loop gives python-control's PM, crossover, GM and phase crossover frequency."""
    s = control.tf("s")
    p = [2 * np.pi * x for x in (1e3, 1e6, 3e6)]
    gm, pm, _, wpc, wgc, _ = control.stability_margins(1000 / ((1 + s / p[0]) * (1 + s / p[1]) * (1 + s / p[2])))
    a = analyse(F, three_pole(F))
    windows = windows_of(a)
    got = read_windows(windows, *_samples(windows, 1e6), stable=True, floor_db=-120)
    assert got.phase_margin_deg == pytest.approx(pm, abs=1e-6)
    assert got.unity_gain_hz == pytest.approx(wgc / (2 * np.pi), rel=1e-9)
    assert got.gain_margin_db == pytest.approx(20 * math.log10(gm), abs=1e-6)
    assert got.phase_crossover_hz == pytest.approx(wpc / (2 * np.pi), rel=1e-9)
    assert reading_of(a).phase_crossover_hz == pytest.approx(wpc / (2 * np.pi), rel=1e-7)


def test_a_conditionally_stable_loop_reads_its_margins_on_the_measured_branch():
    """A loop that turns past -180 and back (type_three) is read on the measured branch: PM +1 deg at python-control's
    crossover, and, being stable, no upper gain margin (its only phase crossover is a lower one)."""
    s = control.tf("s")
    wz = 2 * np.pi * 1e3
    wc = math.tan(math.radians(45.5))
    _, pm, _, _, wgc, _ = control.stability_margins(wc**3 / (1 + wc**2) * (1 + s / wz) ** 2 / (s / wz) ** 3)
    f = np.logspace(0, 6, 121)
    a = analyse(f, type_three(f))
    assert a.nyquist.stable and a.margins.lower_gain_margin_db is not None  # the case is what it claims
    windows = windows_of(a)
    fw = np.unique(np.concatenate([np.linspace(w.fstart_hz, w.fstop_hz, w.points) for w in windows]))
    got = read_windows(windows, fw, type_three(fw), stable=True, floor_db=-120)
    assert got.problem is None
    assert got.phase_margin_deg == pytest.approx(pm, abs=1e-6) and got.unity_gain_hz == pytest.approx(wgc / (2 * np.pi), rel=1e-9)
    assert got.gain_margin_db is None and got.phase_crossover_hz is None


@pytest.mark.parametrize("turn_deg", [-179.8, -179.5, -90.0, 90.0, 179.5, 179.8])
@pytest.mark.parametrize("loop", ["three-pole", "type three"])
def test_a_change_that_turns_the_phase_by_less_than_180_deg_stays_on_the_measured_branch(loop, turn_deg):
    """T exp(-j turn) read from the gain-crossover window of T has the phase margin of the closed-form phase turned by
    turn, for turns up to 179.8 deg either way (the module docstring's promise; closed-form phases, |T| unchanged)."""
    if loop == "three-pole":
        fn, f, phase_at = three_pole, F, three_pole_phase_deg
    else:
        fn, f = type_three, np.logspace(0, 6, 121)
        phase_at = lambda x: -270 + 2 * np.degrees(np.arctan(np.asarray(x) / 1e3))  # noqa: E731
    a = analyse(f, fn(f))
    windows = tuple(w for w in windows_of(a, half_width=0.005) if w.phase_crossovers == 0)
    fw = np.unique(np.concatenate([np.linspace(w.fstart_hz, w.fstop_hz, w.points) for w in windows]))
    got = read_windows(windows, fw, fn(fw) * np.exp(-1j * np.radians(turn_deg)), stable=True, floor_db=-120)
    assert got.problem is None
    assert got.phase_margin_deg == pytest.approx(phase_margin_deg(float(phase_at(got.unity_gain_hz)) - turn_deg), abs=1e-6)


def _polynomial_window(points: int, degree: int):
    """A window 1 to 1.2 kHz whose samples have gain (dB) and phase (deg) polynomials of the given degree in
    u = (log10 f - log10 1.1 kHz) / (log10 1.2 kHz - log10 1.1 kHz), one gain crossover in it; and the exact crossover
    and phase margin (numpy.polynomial roots)."""
    from numpy.polynomial import Polynomial  # noqa: PLC0415

    gain = Polynomial([0.4, -3.0, 0.5, 0.8] + ([0.2, -0.4] if degree == 5 else []))
    phase = Polynomial([-120.0, 10.0, 5.0, -4.0] + ([2.0, 3.0] if degree == 5 else []))
    xm, hx = math.log10(1.1e3), math.log10(1.2e3) - math.log10(1.1e3)
    f = np.linspace(1e3, 1.2e3, points)
    u = (np.log10(f) - xm) / hx
    t = 10 ** (gain(u) / 20) * np.exp(1j * np.radians(phase(u)))
    (uc,) = [r.real for r in gain.roots() if abs(r.imag) < 1e-12 and u[0] <= r.real <= u[-1]]
    window = Window(1e3, 1.2e3, points, float(phase(0.0)), gain_crossovers=1)
    return window, f, t, 10 ** (xm + hx * uc), 180.0 - abs(phase(uc))


@pytest.mark.parametrize(("points", "degree"), [(4, 3), (5, 3), (6, 5), (9, 5)])
def test_a_window_reads_polynomial_data_exactly(points, degree):
    """A spline of degree k reproduces any polynomial of degree <= k (de Boor, A Practical Guide to Splines, 1978): the
    window's quintic (cubic below 6 samples) finds the exact crossover and PM of polynomial gain and phase, from as few as
    4 samples."""
    window, f, t, fc, pm = _polynomial_window(points, degree)
    bottom = Window(10.0, 10.0, 1, 0.0)
    got = read_windows((window, bottom), np.append(10.0, f), np.append(100.0, t), stable=True, floor_db=-120)
    assert got.problem is None and got.peak_db is None
    assert got.unity_gain_hz == pytest.approx(fc, rel=1e-11)
    assert got.phase_margin_deg == pytest.approx(pm, abs=1e-9)


def test_window_holds_its_edges_with_a_relative_room_of_1e_9():
    """Window.holds takes frequencies from fstart (1 - 1e-9) to fstop (1 + 1e-9), edges included, and nothing beyond
    (Window.holds' docstring)."""
    w = Window(1e3, 2e3, 9, 0.0)
    f = [1e3 * (1.0 - 1e-9), 2e3 * (1.0 + 1e-9), 1e3 * (1.0 - 2e-9), 2e3 * (1.0 + 2e-9), 3e3, 5e3, 1.5e3]
    assert w.holds(f).tolist() == [True, True, False, False, False, False, True]


def test_a_reading_does_not_depend_on_the_order_of_the_windows():
    """The windows are read as a set: reversed, they give the same figures (read_windows' docstring)."""
    a = analyse(F, three_pole(F))
    windows = windows_of(a)
    f, t = _samples(windows, 1.02e6)
    forward = read_windows(windows, f, t, stable=True, floor_db=-120)
    assert forward.problem is None
    assert read_windows(windows[::-1], f, t, stable=True, floor_db=-120) == forward


def test_without_a_peak_window_there_is_no_peak_and_without_a_bottom_no_reading():
    """Windows without the peak's give no peaking (None) but the margins; without the bottom's, no reading at all."""
    a = analyse(F, three_pole(F))
    windows = windows_of(a)
    f, t = _samples(windows, 1e6)
    no_peak = read_windows(tuple(w for w in windows if not w.peak), f, t, stable=True, floor_db=-120)
    assert no_peak.peak_db is None and no_peak.phase_margin_deg == read_windows(windows, f, t, stable=True, floor_db=-120).phase_margin_deg
    assert read_windows(tuple(w for w in windows if not w.bottom), f, t, stable=True, floor_db=-120).problem == (
        "no sample at the bottom of the sweep")


def test_a_phase_crossover_that_leaves_its_window_is_flagged():
    """Moving the third pole from 3 to 4 MHz moves the phase crossover more than 6 % (out of its window) while the gain
    crossover stays in its own: the reading says so, with no figures (three-pole closed form)."""
    a = analyse(F, three_pole(F))
    windows = windows_of(a)
    f = np.unique(np.concatenate([np.linspace(w.fstart_hz, w.fstop_hz, w.points) for w in windows]))
    s = 2j * np.pi * f
    moved = three_pole(f) * (1 + s / (2 * np.pi * 3e6)) / (1 + s / (2 * np.pi * 4e6))
    phase = windows[1]
    got = read_windows(windows, f, moved, stable=True, floor_db=-120)
    assert got.problem == f"0 phase crossover(s) between {phase.fstart_hz:.6g} and {phase.fstop_hz:.6g} Hz, where the measured loop had 1"
    assert got.phase_margin_deg is None and got.gain_margin_db is None


@pytest.mark.parametrize("where", ["f[1]", "just above f[1]", "between f[1] and f[2]", "between f[-3] and f[-2]", "f[-2]", "nan"])
def test_a_peak_counts_only_strictly_inside_the_second_and_last_but_one_samples(where):
    """The closed-loop peak is followed (a peak window, peak_db in reading_of) only when it lies strictly between the
    second and the last-but-one sample; at those samples or beyond it is the sweep's edge (LocalReading's docstring)."""
    a = analyse(F, three_pole(F))
    freq = {"f[1]": F[1], "just above f[1]": np.nextafter(F[1], np.inf), "between f[1] and f[2]": (F[1] + F[2]) / 2,
            "between f[-3] and f[-2]": (F[-3] + F[-2]) / 2, "f[-2]": F[-2], "nan": math.nan}[where]
    moved = replace(a, peaking=replace(a.peaking, peak_freq_hz=float(freq)))
    inside = where not in ("f[1]", "f[-2]", "nan")
    assert (reading_of(moved).peak_db is not None) == inside
    assert any(w.peak for w in windows_of(moved)) == inside


def test_a_loop_without_a_closed_loop_peak_reads_no_peaking():
    """|T/(1+T)| of a one-pole loop falls from DC on (closed form 10/(11 + s/p)), so its maximum is at the bottom of the
    sweep: reading_of gives no peaking, and its windows no peak window."""
    f = np.logspace(0, 6, 121)
    a = analyse(f, 10 / (1 + 1j * f / 1e3))
    assert reading_of(a).peak_db is None and not any(w.peak for w in windows_of(a))


def test_windows_that_touch_at_an_edge_are_one():
    """Two crossovers whose windows meet exactly (f2 exp(-0.06) == f1 exp(0.06) in floating point) give one window; one
    ulp further apart, two (windows_of's docstring: windows that would overlap are one)."""
    a = analyse(F, three_pole(F))
    first = 1e3
    touching = first * math.exp(0.06) / math.exp(-0.06)
    assert touching * math.exp(-0.06) == first * math.exp(0.06)  # the case is what it claims
    for second, count in ((touching, 1), (np.nextafter(touching, np.inf), 2)):
        crossings = tuple(replace(a.gain_crossovers[0], freq_hz=float(fr)) for fr in (first, second))
        moved = replace(a, gain_crossovers=crossings, phase_crossovers=())
        assert [w.gain_crossovers for w in windows_of(moved) if w.points > 1] == ([2] if count == 1 else [1, 1])


@pytest.mark.parametrize("half_width", [0.02, 0.06, 0.1, 0.3])
@pytest.mark.parametrize("points", [5, 9, 17])
def test_a_window_around_one_crossover_has_exactly_the_points_asked_for(half_width, points):
    """A window around one crossover is swept at exactly ``points`` frequencies, whatever its width (windows_of's
    docstring; each point is one more simulated frequency)."""
    a = analyse(F, three_pole(F))
    single = [w for w in windows_of(a, half_width=half_width, points=points) if w.gain_crossovers + w.phase_crossovers == 1]
    assert [w.points for w in single] == [points, points]


def test_windows_read_single_precision_data_in_double_precision():
    """Frequencies in float32 and T in complex64 give the reading of the very same values in float64 and complex128
    (numpy's exact widening), and Window.holds decides on the float64 value: a float32 frequency 3e-8 above the
    window's top is outside it (three-pole closed form)."""
    a = analyse(F, three_pole(F))
    windows = tuple(w for w in windows_of(a) if not w.peak)  # float32 cannot hold the peak's frequency to 1e-9
    f, t = _samples(windows, 1.02e6)
    f32, t64 = f.astype(np.float32), t.astype(np.complex64)
    single = read_windows(windows, f32, t64, stable=True, floor_db=-120)
    assert single.problem is None
    assert single == read_windows(windows, f32.astype(float), t64.astype(complex), stable=True, floor_db=-120)
    top = np.float32(1001.0)  # float32 spacing near 1e3 is 6.1e-5: 1001 is exact, and so is the window below
    above = np.nextafter(top, np.float32(np.inf))
    w = Window(900.0, float(top) * (1.0 + 1e-9) * (1.0 + 3e-8), 9, 0.0)
    assert w.holds(np.array([top, above])).tolist() == w.holds(np.array([top, above], dtype=float)).tolist() == [True, False]
