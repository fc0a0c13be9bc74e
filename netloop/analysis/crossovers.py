"""Gain crossovers (|T| = 1) and phase crossovers (T negative real), located on the interpolant.

Phase margin at a gain crossover is the angular distance from T to -1 read on the continuous
phase branch (anchored on T's low-frequency asymptote, see netloop.analysis.response): with the
phase phi in (-180, 180) the loop has not turned past -1 and PM = 180 - |phi| > 0; beyond
(|phi| >= 180) PM is minus the distance to the nearest odd multiple of 180. So the low crossing
of an AC-coupled loop with +84 deg of lead has PM = +96, not the -96 that wrapping the phase
into [-180, 180) gives, and a crossing on a resonance at -25 deg has PM = +155. For loops with
open-loop poles in the right half plane, or curves that turn past -1 and back while |T| > 1,
the sign is only the local reading: the Nyquist count decides stability.
"""

from __future__ import annotations

import math

import numpy as np

from netloop.analysis.preload import load_scipy
from netloop.analysis.response import Response
from netloop.analysis.results import GainCrossover, PhaseCrossover

__all__ = ["dc_phase_crossover", "find_gain_crossovers", "find_phase_crossovers", "phase_margin_deg", "peaking_at_crossover"]

_XTOL = 1e-13


def phase_margin_deg(phase_deg: float) -> float:
    """Distance (deg) from the continuous phase to the nearest odd multiple of 180; negative once past +-180."""
    if abs(phase_deg) <= 180.0:
        return float(180.0 - abs(phase_deg))
    k = 180.0 + 360.0 * round((phase_deg - 180.0) / 360.0)  # nearest odd multiple of 180
    return float(-abs(phase_deg - k))


def peaking_at_crossover(pm_deg: float) -> tuple[float, float, float]:
    """|T/(1+T)| where |T| = 1: (exact 1/(2 sin(|PM|/2)), its dB, small-angle 1/|PM rad|)."""
    half = math.radians(abs(pm_deg)) / 2.0
    exact = math.inf if half == 0.0 else 1.0 / (2.0 * math.sin(half))
    small = math.inf if half == 0.0 else 1.0 / (2.0 * half)
    return exact, 20.0 * math.log10(exact), small


def _delay_margin_s(phase_deg: float, pm_deg: float, freq_hz: float) -> float | None:
    if pm_deg <= 0.0:
        return None
    lag = math.radians((phase_deg + 180.0) % 360.0)  # extra lag that brings the phase onto -180 (mod 360)
    return lag / (2.0 * math.pi * freq_hz)


def _root(fun, a: float, b: float) -> float:
    """The root of fun in [a, b]; the samples bracket it, but the spline at a knot may differ by rounding."""
    fa, fb = fun(a), fun(b)
    if fa == 0.0:
        return a
    if fb == 0.0:
        return b
    if (fa < 0.0) == (fb < 0.0):
        return a if abs(fa) <= abs(fb) else b
    load_scipy()  # scipy loads on first use, once (netloop.analysis.preload)
    from scipy.optimize import brentq  # noqa: PLC0415

    ends = {a: fa, b: fb}  # brentq evaluates both ends first: the values at hand, not two more spline evaluations
    return brentq(lambda u: ends[u] if u in ends else fun(u), a, b, xtol=_XTOL)


def find_gain_crossovers(resp: Response) -> tuple[GainCrossover, ...]:
    """Every |T| = 1 crossing, ascending, each located by root-finding on the gain spline."""
    above = resp.gain_db >= 0.0
    out = []
    for i in np.flatnonzero(above[:-1] != above[1:]):
        a, b = resp.x[i], resp.x[i + 1]
        xr = _root(lambda u: float(resp.gain_at(u)), a, b)
        f = float(10.0**xr)
        phase = float(resp.phase_at(xr))
        direction = "down" if resp.gain_db[i] > resp.gain_db[i + 1] else "up"
        pm = phase_margin_deg(phase)
        exact, exact_db, small = peaking_at_crossover(pm)
        out.append(GainCrossover(f, phase, pm, direction, exact, exact_db, small, _delay_margin_s(phase, pm, f)))
    return tuple(out)


def find_phase_crossovers(resp: Response, floor_abs_db: float) -> tuple[tuple[PhaseCrossover, ...], tuple[PhaseCrossover, ...]]:
    """(kept, ignored) phase crossovers; ignored are those where |T| is below floor_abs_db (noise)."""
    level = np.floor((resp.phase_deg - 180.0) / 360.0)  # index of the odd multiple of 180 at or below
    kept, ignored = [], []
    for i in np.flatnonzero(level[:-1] != level[1:]):
        lo, hi = sorted((level[i], level[i + 1]))
        for m in np.arange(lo + 1, hi + 1):
            target = 180.0 + 360.0 * m
            a, b = resp.x[i], resp.x[i + 1]
            xr = _root(lambda u, tg=target: float(resp.phase_at(u)) - tg, a, b)
            gain = float(resp.gain_at(xr))
            rec = PhaseCrossover(float(10.0**xr), float(target), gain, -gain, "upper" if gain < 0.0 else "lower")
            (kept if gain >= floor_abs_db else ignored).append(rec)
    return tuple(kept), tuple(ignored)


def dc_phase_crossover(resp: Response) -> PhaseCrossover:
    """The phase crossover at DC of a loop whose T(0) is negative real, read at the lowest frequency."""
    phase = 180.0 + 360.0 * round((float(resp.phase_deg[0]) - 180.0) / 360.0)
    gain = float(resp.gain_db[0])
    return PhaseCrossover(0.0, phase, gain, -gain, "upper" if gain < 0.0 else "lower")
