"""Helpers for the analysis tests: sample an analytic loop, and reference figures from python-control."""

from __future__ import annotations

import numpy as np


def sample(loop, lo_hz: float, hi_hz: float, per_decade: int = 20, offset: float = 0.0):
    """(freq_hz, T) of a python-control transfer function L(s) at per_decade log-spaced points, s = j 2 pi f."""
    decades = np.log10(hi_hz) - np.log10(lo_hz)
    n = int(round(decades * per_decade)) + 1
    f = np.logspace(np.log10(lo_hz) + offset / per_decade, np.log10(hi_hz), n)
    return f, np.asarray(loop(2j * np.pi * f), dtype=complex)


def poly_loop(num, den):
    """A callable T(s) = num(s) / den(s) from numpy polynomial coefficients (highest power first)."""
    num = np.asarray(num, dtype=float)
    den = np.asarray(den, dtype=float)
    return lambda s: np.polyval(num, s) / np.polyval(den, s)


def closed_loop_rhp_roots(num, den) -> int:
    """Right-half-plane roots of den + num, the closed loop's characteristic polynomial (numpy.roots)."""
    n = max(len(num), len(den))
    char = np.pad(np.asarray(den, float), (n - len(den), 0)) + np.pad(np.asarray(num, float), (n - len(num), 0))
    return int(np.sum(np.roots(char).real > 0))
