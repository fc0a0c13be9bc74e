"""Where the loop comes closest to -1 (modulus margin) and the real peak of |T / (1 + T)|."""

from __future__ import annotations

import math

import numpy as np

from netloop.analysis.preload import load_scipy
from netloop.analysis.response import Response
from netloop.analysis.results import Peaking

__all__ = ["closed_loop_peaking", "in_band_db", "modulus_margin"]


def _extremum(resp: Response, fun) -> tuple[float, float]:
    """(x, value) of the minimum of fun(T) over the interpolated sweep, polished between grid points."""
    xs = resp.dense_x(16)
    with np.errstate(divide="ignore", invalid="ignore"):
        vals = fun(resp.t_at(xs))
    i = int(np.nanargmin(vals))  # NaN (inf / inf where |T| overflowed) is never the extremum
    lo, hi = xs[max(i - 1, 0)], xs[min(i + 1, xs.size - 1)]
    if hi > lo:
        load_scipy()  # scipy loads on first use, once (netloop.analysis.preload)
        from scipy.optimize import minimize_scalar  # noqa: PLC0415

        res = minimize_scalar(lambda u: float(fun(resp.t_at(u))), bounds=(lo, hi), method="bounded", options={"xatol": 1e-12})
        if res.fun < vals[i]:
            return float(res.x), float(res.fun)
    return float(xs[i]), float(vals[i])


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
