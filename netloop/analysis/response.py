"""Checked frequency-response data and its smooth interpolant in log-frequency.

Data rules (AnalysisError otherwise): ``freq_hz`` one-dimensional, finite, positive and strictly
ascending, at least 4 samples; ``t`` the same length, convertible to complex. NaN or infinite
samples of T are REJECTED with an AnalysisError that says how many and at which frequency the
first one is: a hole in the data can hide a crossover, so we never drop samples silently.
A sample with T exactly 0 is kept and read as -400 dB (far below any floor).

The interpolant is an interpolating quintic spline (cubic when there are fewer than 6 samples)
in x = log10(f) of 20 log10|T| and of the unwrapped phase, anchored on the branch of T's
low-frequency asymptote (see anchored_phase_deg: in (-180, 180] for a loop without integrators). Linear interpolation misplaces crossovers by far more than
1e-3 deg at 20 points per decade; a cubic just meets it on smooth loops (about 5e-4 deg on the
three-pole example), the quintic with a hundredfold room (tests/analysis pin the claim).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from netloop.analysis.preload import load_scipy
from netloop.errors import AnalysisError

if TYPE_CHECKING:
    from scipy.interpolate import BSpline

__all__ = ["Response", "anchored_phase_deg", "check_response", "low_frequency_slope", "ratio_db"]

_TINY = 1e-20  # |T| = 0 is read as -400 dB: far below any floor, without wrecking the spline


def check_response(freq_hz, t) -> tuple[np.ndarray, np.ndarray]:
    """Validate and convert (freq_hz, t) to float and complex arrays; raise AnalysisError on bad data."""
    try:
        f = np.asarray(freq_hz, dtype=float)
    except (TypeError, ValueError) as exc:
        raise AnalysisError(f"frequencies must be real numbers in Hz: {exc}") from exc
    try:
        tt = np.asarray(t, dtype=complex)
    except (TypeError, ValueError) as exc:
        raise AnalysisError(f"the return ratio T must be complex numbers: {exc}") from exc
    if f.ndim != 1 or tt.ndim != 1:
        raise AnalysisError(f"expected one-dimensional arrays, got freq_hz of shape {f.shape} and T of shape {tt.shape}")
    if f.size != tt.size:
        raise AnalysisError(f"freq_hz has {f.size} samples but T has {tt.size}; expected one T per frequency")
    if f.size < 4:
        raise AnalysisError(f"need at least 4 frequency samples to analyse a loop, got {f.size}")
    if not np.all(np.isfinite(f)) or np.any(f <= 0):
        raise AnalysisError("frequencies must be finite and positive (Hz)")
    if np.any(np.diff(f) <= 0):
        i = int(np.argmax(np.diff(f) <= 0))
        raise AnalysisError(f"frequencies must be strictly ascending: sample {i + 1} ({f[i + 1]:.6g} Hz) follows {f[i]:.6g} Hz")
    bad = ~np.isfinite(tt)
    if np.any(bad):
        i = int(np.argmax(bad))
        raise AnalysisError(
            f"T has {int(bad.sum())} NaN or infinite sample(s), the first at {f[i]:.6g} Hz; "
            "expected finite complex values (a singular probe solve or a failed simulation point?)"
        )
    return f, tt


def _gain_db(t: np.ndarray) -> np.ndarray:
    """20 log10 |T|, with T = 0 read as -400 dB."""
    return 20.0 * np.log10(np.maximum(np.abs(t), _TINY))


def low_frequency_slope(x: np.ndarray, gain_db: np.ndarray) -> tuple[int, float]:
    """(k, slope): poles of T at s = 0 (negative for zeros there) from the slope in dB/decade over the lowest 3 samples."""
    n = min(3, x.size)
    dx = x[:n] - np.mean(x[:n])
    slope = float(np.dot(dx, gain_db[:n]) / np.dot(dx, dx))  # the least-squares line's slope (np.polyfit's, without its set-up)
    return int(round(-slope / 20.0)), slope


def anchored_phase_deg(t: np.ndarray, origin_poles: int = 0) -> np.ndarray:
    """Unwrapped phase of T in degrees, on the branch of T's low-frequency asymptote C / s^k.

    The asymptote's phase is arg(C) - 90 k with arg(C) = 0 (negative feedback at DC) or -180
    (positive feedback at DC); the unwrapped phase is shifted by whole turns so that the lowest
    sample lies within 90 deg of the nearer of the two (tests/analysis/test_warning_figures.py).
    Without poles at the origin and with negative feedback this puts the low-frequency phase in
    (-180, 180]; a triple integrator starts near -270, not +90.
    """
    phase = np.degrees(np.unwrap(np.angle(t)))
    k = origin_poles
    candidates = (-90.0 * k, -180.0 - 90.0 * k)  # arg(C) = 0 or -180
    asymptote = min(candidates, key=lambda a: abs((phase[0] - a + 180.0) % 360.0 - 180.0))
    turns = round((phase[0] - asymptote) / 360.0)
    return phase - 360.0 * turns


@dataclass(frozen=True, slots=True)
class Response:
    """T sampled at ascending frequencies, with a spline interpolant of gain (dB) and phase (deg) in log10 f.

    ``spline`` holds the two as its columns: each column is the interpolating spline of its own data,
    bit for bit (LAPACK's banded solve takes the right-hand sides column by column, and an evaluation
    sums each column alone over de Boor's basis at x), at about half the cost of two splines.
    ``bottom`` is low_frequency_slope of the samples: (poles of T at s = 0, slope in dB/decade).
    """

    freq_hz: np.ndarray
    t: np.ndarray
    x: np.ndarray  # log10(freq_hz)
    gain_db: np.ndarray
    phase_deg: np.ndarray
    spline: BSpline
    bottom: tuple[int, float]
    _dense: dict[int, tuple[np.ndarray, np.ndarray]] = field(default_factory=dict, init=False, repr=False, compare=False)

    @classmethod
    def from_data(cls, freq_hz, t) -> Response:
        f, tt = check_response(freq_hz, t)
        x, gain = np.log10(f), _gain_db(tt)
        bottom = low_frequency_slope(x, gain)
        return cls._interpolated(f, tt, x, gain, anchored_phase_deg(tt, bottom[0]), bottom)

    @classmethod
    def of_samples(cls, f: np.ndarray, t: np.ndarray, phase_deg: np.ndarray) -> Response:
        """The interpolated response of checked samples (float f, complex t) whose continuous phase is ``phase_deg``."""
        x, gain = np.log10(f), _gain_db(t)
        return cls._interpolated(f, t, x, gain, phase_deg, low_frequency_slope(x, gain))

    @classmethod
    def _interpolated(cls, f, t, x, gain, phase, bottom) -> Response:
        load_scipy()  # scipy loads on first use, once (netloop.analysis.preload)
        from scipy.interpolate import make_interp_spline  # noqa: PLC0415

        return cls(f, t, x, gain, phase, make_interp_spline(x, np.column_stack((gain, phase)), k=5 if f.size >= 6 else 3), bottom)

    def gain_at(self, x) -> np.ndarray:
        """Interpolated 20 log10 |T| at x = log10 f."""
        return self.spline(x)[..., 0]

    def phase_at(self, x) -> np.ndarray:
        """Interpolated continuous phase of T (deg) at x = log10 f."""
        return self.spline(x)[..., 1]

    def t_at(self, x) -> np.ndarray:
        """Interpolated complex T at x = log10 f."""
        both = self.spline(x)
        with np.errstate(over="ignore", invalid="ignore"):  # |T| beyond 1e308 (a gain of 1e300 in a netlist) is inf, said elsewhere
            return 10.0 ** (both[..., 0] / 20.0) * np.exp(1j * np.radians(both[..., 1]))

    def dense_x(self, per_interval: int = 16) -> np.ndarray:
        """A grid in log10 f with per_interval points in each sample interval (samples included)."""
        frac = np.arange(per_interval) / per_interval
        inner = (self.x[:-1, None] + np.diff(self.x)[:, None] * frac[None, :]).ravel()
        return np.append(inner, self.x[-1])

    def dense_t(self, per_interval: int = 16) -> tuple[np.ndarray, np.ndarray]:
        """(dense_x(per_interval), T there), read-only and computed once for this response: the Nyquist count, the
        modulus margin and the peaking all read T on the same grid."""
        if per_interval not in self._dense:
            xs = self.dense_x(per_interval)
            t = self.t_at(xs)
            xs.flags.writeable = t.flags.writeable = False
            self._dense[per_interval] = (xs, t)
        return self._dense[per_interval]


def ratio_db(value: float | None) -> float | None:
    """20 log10 of a linear magnitude; None for None, -inf for 0."""
    if value is None:
        return None
    return -math.inf if value <= 0 else 20.0 * math.log10(value)
