"""The frequency points of an ngspice ``ac`` sweep, and merging several sweeps into one grid."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np

from netloop.sim.job import AcSweep

__all__ = ["merge_sweeps", "sweep_frequencies"]

_RELTOL = 1e-3  # ngspice's default RELTOL, which its ac loop uses as the end tolerance (acan.c)


def sweep_frequencies(sweep: AcSweep) -> np.ndarray:
    """The points ngspice's ``ac`` visits for ``sweep``: start, then steps while f <= stop (+ a tolerance)."""
    start, stop, points = float(sweep.fstart_hz), float(sweep.fstop_hz), int(sweep.points)
    if points < 1 or start <= 0 or stop < start:
        raise ValueError(f"bad ac sweep {sweep}: need points >= 1 and 0 < fstart_hz <= fstop_hz")
    if sweep.kind == "dec":
        delta = math.exp(math.log(10.0) / points)
        tol = delta * stop * _RELTOL
        out = []
        freq = start
        while freq <= stop + tol:
            out.append(freq)
            freq *= delta
        return np.asarray(out, dtype=float)
    if sweep.kind == "lin":
        if points == 1:
            return np.asarray([start])
        delta = (stop - start) / (points - 1)
        tol = delta * _RELTOL
        out = []
        freq = start
        while freq <= stop + tol and len(out) < points:
            out.append(freq)
            freq += delta
        return np.asarray(out, dtype=float)
    raise ValueError(f"bad ac sweep kind {sweep.kind!r}: expected 'dec' or 'lin'")


def merge_sweeps(
    parts: Sequence[tuple[np.ndarray, Mapping[str, np.ndarray]]], rtol: float = 1e-9
) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """Concatenate sweeps in ascending frequency, keeping the first of points closer than ``rtol``."""
    if not parts:
        return np.zeros(0), {}
    freq = np.concatenate([np.asarray(f, dtype=float) for f, _ in parts])
    names = list(parts[0][1])
    vectors = {n: np.concatenate([np.asarray(v[n]) for _, v in parts]) for n in names}
    order = np.argsort(freq, kind="stable")
    freq = freq[order]
    keep = np.ones(freq.size, dtype=bool)
    if freq.size > 1:
        keep[1:] = np.diff(freq) > rtol * np.abs(freq[1:])
    return freq[keep], {n: v[order][keep] for n, v in vectors.items()}
