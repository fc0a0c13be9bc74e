"""Where the loop comes closest to -1 (modulus margin) and the real peak of |T / (1 + T)|."""

from __future__ import annotations

import math

import numpy as np

from netloop.analysis.response import Response
from netloop.analysis.results import Peaking

__all__ = ["closed_loop_peaking", "in_band_db", "modulus_margin"]


_ZOOM_POINTS = 65  # points a bracket is sampled at in each step of the polish (the bracket shrinks 32-fold a step)
_ZOOM_XATOL = 1e-10  # the polish stops when the bracket in log10 f is this narrow: 2.3e-10 of the frequency, and the value
# at a smooth extremum is then exact to the square of that (what limits both is the interpolant, not the polish)
_ZOOM_STEPS = np.arange(float(_ZOOM_POINTS))  # 0, 1, ..., 64: the multiples of the step in np.linspace's own arithmetic


def _zoom_grid(lo: np.float64, hi: np.float64) -> np.ndarray:
    """np.linspace(lo, hi, _ZOOM_POINTS) bit for bit, by its own arithmetic (index times step, plus lo, the last point hi)
    without its argument handling: 1.3 us a call instead of 4.3, twelve calls an analysis (timeit, numpy 2.4)."""
    grid = _ZOOM_STEPS * ((hi - lo) / (_ZOOM_POINTS - 1))
    grid += lo
    grid[-1] = hi
    return grid


def _extremum(resp: Response, fun) -> tuple[float, float]:
    """(x, value) of the minimum of fun(T) over the interpolated sweep, polished between grid points.

    The polish samples the bracket around the dense grid's minimum at _ZOOM_POINTS points, keeps the two
    intervals beside the smallest and samples them again, down to a bracket _ZOOM_XATOL wide: a handful of
    vectorised spline evaluations instead of a scalar minimiser's many single ones, the same minimum of the
    interpolant (tests/analysis/test_closed_loop_level.py against scipy's minimize_scalar on the closed form)."""
    xs, t = resp.dense_t(16)  # the grid and T the Nyquist count read
    with np.errstate(divide="ignore", invalid="ignore"):
        vals = fun(t)
    # NaN (inf / inf where |T| overflowed) is never the extremum; np.nanargmin's copy only where there is one (15 us)
    i = int(np.nanargmin(vals) if np.isnan(vals).any() else np.argmin(vals))
    best_x, best = float(xs[i]), float(vals[i])
    lo, hi = xs[max(i - 1, 0)], xs[min(i + 1, xs.size - 1)]
    while hi - lo > _ZOOM_XATOL:
        grid = _zoom_grid(lo, hi)
        with np.errstate(divide="ignore", invalid="ignore"):
            v = fun(resp.t_at(grid))
        v[np.isnan(v)] = np.inf  # NaN is never the extremum
        j = int(np.argmin(v))
        if not v[j] < np.inf:
            break
        if v[j] < best:
            best_x, best = float(grid[j]), float(v[j])
        lo, hi = grid[max(j - 1, 0)], grid[min(j + 1, grid.size - 1)]
    return best_x, best


def _minus_closed_loop(t):
    """-|T / (1 + T)|, -inf where T = -1."""
    t = np.asarray(t, dtype=complex)
    den = 1.0 + t
    out = np.full(t.shape, -np.inf)
    with np.errstate(invalid="ignore", over="ignore"):  # inf / inf where |T| overflowed: NaN, never the extremum
        np.divide(-np.abs(t), np.abs(den), out=out, where=den != 0.0)
    return out


def modulus_margin(resp: Response) -> tuple[float, float]:
    """(min |1 + T|, its frequency in Hz) over the sweep."""
    x, v = _extremum(resp, lambda t: np.abs(1.0 + t))
    return v, float(10.0**x)


def in_band_db(t0: complex) -> float:
    """The level peaking is measured from: |T/(1+T)| in dB at the lowest frequency when |T| > 1 there, else 0 dB."""
    t0 = complex(t0)
    return 20.0 * math.log10(abs(t0 / (1.0 + t0))) if abs(t0) > 1.0 else 0.0


def closed_loop_peaking(resp: Response) -> Peaking:
    """Peak of |T/(1+T)| relative to its regulated low-frequency value (or to 1 when |T| <= 1 there)."""
    x, v = _extremum(resp, _minus_closed_loop)
    peak = -v
    absolute_db = 20.0 * math.log10(peak) if peak > 0 else -math.inf
    reference_db = in_band_db(resp.t[0])
    return Peaking(absolute_db - reference_db, float(10.0**x), reference_db, absolute_db)
