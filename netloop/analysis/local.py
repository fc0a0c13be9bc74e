"""Margins read again from short sweeps around a measured loop's crossovers and closed-loop peak.

After a small change of one element the crossovers move a little, so T need only be sampled again
near them: ``windows_of(analysis)`` names short sweeps around every gain and phase crossover, and
two single frequencies: the measured peak of |T/(1+T)| and the lowest frequency (the in-band level
peaking is measured from). ``read_windows`` finds the crossovers in the new samples with the very
functions ``analyse`` uses (quintic interpolation in log f, the continuous phase branch,
netloop.analysis.margins), so a reading of the unchanged loop equals its analysis.

Peaking is read at the measured peak's frequency, not searched again: at a maximum the height does
not change, to first order, when the maximum moves, and the second-order part is even in the change,
so a central difference of the level there is the slope of the peak itself (a flat peak, whose
frequency moves far under a small change, needs no window that follows it).

Each window's phase is put on the branch of the measured loop (the nearest whole turn to the
measured phase at the window's middle), which holds while the change turns the phase by less
than 180 deg there. A reading that cannot be trusted (a crossover left its window, another one
appeared, the peak reached a window's edge) says why in ``problem``: the caller then measures
the changed loop over a whole sweep instead.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from netloop.analysis.closed_loop import in_band_db
from netloop.analysis.crossovers import find_gain_crossovers, find_phase_crossovers
from netloop.analysis.margins import summarise_margins
from netloop.analysis.response import Response
from netloop.analysis.results import LoopAnalysis

__all__ = ["LocalReading", "Window", "read_windows", "reading_of", "windows_of"]


@dataclass(frozen=True, slots=True)
class Window:
    """A short linear sweep around crossovers of a measured loop (windows that would overlap are one),
    or a single frequency: the bottom of the measured sweep, or its closed-loop peak (``peak``).

    fstart_hz, fstop_hz, points   the sweep: ``points`` evenly spaced frequencies.
    phase_deg         the measured continuous phase of T at the window's middle (the branch anchor).
    gain_crossovers, phase_crossovers   how many the measured loop had in the window.
    """

    fstart_hz: float
    fstop_hz: float
    points: int
    phase_deg: float
    gain_crossovers: int = 0
    phase_crossovers: int = 0
    peak: bool = False

    @property
    def bottom(self) -> bool:
        return self.points == 1 and not self.peak

    def holds(self, freq_hz) -> np.ndarray:
        """Which of ``freq_hz`` lie in this window, edges included, with a relative room of 1e-9 for rounding."""
        f = np.asarray(freq_hz, dtype=float)
        return (f >= self.fstart_hz * (1.0 - 1e-9)) & (f <= self.fstop_hz * (1.0 + 1e-9))


@dataclass(frozen=True, slots=True)
class LocalReading:
    """The figures a sensitivity follows, read from the windows (or from a whole analysis).

    Each is None when it does not exist for the loop (as in netloop.analysis.results.Margins);
    ``peak_db`` is None when |T/(1+T)| has no peak inside the sweep (strictly between its second and
    its last-but-one sample: a maximum found at those or beyond is the sweep's edge, not a peak);
    from windows it is the level at the measured peak's frequency (see the module docstring). ``problem`` is None for a
    reading that can be trusted, else why not (then the figures are None).
    """

    phase_margin_deg: float | None
    unity_gain_hz: float | None
    gain_margin_db: float | None
    phase_crossover_hz: float | None
    peak_db: float | None
    problem: str | None = None

    @classmethod
    def failed(cls, problem: str) -> LocalReading:
        return cls(None, None, None, None, None, problem)


def _has_inner_peak(analysis: LoopAnalysis) -> bool:
    f = analysis.freq_hz
    peak = analysis.peaking.peak_freq_hz
    return bool(math.isfinite(peak) and f[1] < peak < f[-2])


def reading_of(analysis: LoopAnalysis) -> LocalReading:
    """The same figures from a whole analysis (the reference a window reading is compared with)."""
    m = analysis.margins
    peak = analysis.peaking.peak_db if _has_inner_peak(analysis) else None
    return LocalReading(m.phase_margin_deg, m.unity_gain_hz, m.gain_margin_db, m.phase_crossover_hz, peak)


def windows_of(analysis: LoopAnalysis, half_width: float = 0.06, points: int = 9) -> tuple[Window, ...]:
    """Windows spanning ``freq * exp(+-half_width)`` around each crossover (``points`` points each;
    overlapping ones joined, with proportionally more), ascending; then the peak's frequency (when the
    peak lies inside the sweep) and the bottom of the sweep, one point each.

    Empty when the loop has a feature windows cannot follow: no gain crossover, or a phase crossover
    at DC (positive feedback there); the caller then measures whole sweeps.
    """
    if not analysis.gain_crossovers or any(c.freq_hz <= 0.0 for c in analysis.phase_crossovers):
        return ()
    features = [(c.freq_hz, "gain") for c in analysis.gain_crossovers] + [(c.freq_hz, "phase") for c in analysis.phase_crossovers]
    groups: list[list[tuple[float, str]]] = []
    for freq, kind in sorted(features):
        if groups and freq * math.exp(-half_width) <= groups[-1][-1][0] * math.exp(half_width):
            groups[-1].append((freq, kind))
        else:
            groups.append([(freq, kind)])
    resp = Response.from_data(analysis.freq_hz, analysis.t)
    out = []
    for group in groups:
        lo, hi = group[0][0] * math.exp(-half_width), group[-1][0] * math.exp(half_width)
        kinds = [kind for _, kind in group]
        span = 1.0 + math.log(group[-1][0] / group[0][0]) / (2.0 * half_width)  # in window widths: exactly 1 for one crossover
        count = max(points, math.ceil((points - 1) * span) + 1)
        out.append(Window(lo, hi, count, float(resp.phase_at(math.log10((lo + hi) / 2.0))), kinds.count("gain"), kinds.count("phase")))
    if _has_inner_peak(analysis):
        peak = analysis.peaking.peak_freq_hz
        out.append(Window(peak, peak, 1, float(resp.phase_at(math.log10(peak))), peak=True))
    bottom = float(analysis.freq_hz[0])
    out.append(Window(bottom, bottom, 1, float(resp.phase_deg[0])))
    return tuple(out)


def _window_response(window: Window, f: np.ndarray, t: np.ndarray) -> Response:
    """A Response of one window's samples, its phase on the measured loop's branch."""
    phase = np.degrees(np.unwrap(np.angle(t)))
    middle = float(np.interp(math.log10((window.fstart_hz + window.fstop_hz) / 2.0), np.log10(f), phase))
    return Response.of_samples(f, t, phase - 360.0 * round((middle - window.phase_deg) / 360.0))


def read_windows(windows: tuple[Window, ...], freq_hz, t, *, stable: bool, floor_db: float) -> LocalReading:
    """The figures of a changed loop from its samples in ``windows`` (all windows' samples together).

    Each window must hold as many crossovers of each kind as the measured loop had there. ``stable`` is the Nyquist verdict the summary margins follow
    (the measured loop's: a small change that keeps every crossover keeps the count).
    """
    f = np.asarray(freq_hz, dtype=float)
    tt = np.asarray(t, dtype=complex)
    gains, phases = [], []
    peak_db = None
    bottom = next((w for w in windows if w.bottom), None)
    if bottom is None or not np.any(bottom.holds(f)):
        return LocalReading.failed("no sample at the bottom of the sweep")
    t0 = complex(tt[np.flatnonzero(bottom.holds(f))[0]])
    for w in windows:
        if w.bottom:
            continue
        inside = w.holds(f)
        if w.peak:
            if not np.any(inside):
                return LocalReading.failed(f"no sample at the closed-loop peak ({w.fstart_hz:.6g} Hz)")
            tp = complex(tt[np.flatnonzero(inside)[0]])
            peak_db = 20.0 * math.log10(abs(tp / (1.0 + tp))) - in_band_db(t0)
            continue
        if np.count_nonzero(inside) < 4:
            return LocalReading.failed(f"fewer than 4 samples between {w.fstart_hz:.6g} and {w.fstop_hz:.6g} Hz")
        resp = _window_response(w, f[inside], tt[inside])
        where = f"between {w.fstart_hz:.6g} and {w.fstop_hz:.6g} Hz"
        found = find_gain_crossovers(resp)
        if len(found) != w.gain_crossovers:
            return LocalReading.failed(f"{len(found)} gain crossover(s) {where}, where the measured loop had {w.gain_crossovers}")
        kept, ignored = find_phase_crossovers(resp, floor_db)
        if len(kept) != w.phase_crossovers or ignored:
            return LocalReading.failed(f"{len(kept)} phase crossover(s) {where}, where the measured loop had {w.phase_crossovers}")
        gains.extend(found)
        phases.extend(kept)
    m = summarise_margins(tuple(gains), tuple(phases), stable, (math.nan, math.nan))
    return LocalReading(m.phase_margin_deg, m.unity_gain_hz, m.gain_margin_db, m.phase_crossover_hz, peak_db)
