"""The frequency points of an ngspice ``ac`` sweep, and merging several sweeps into one grid."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np

from netloop.sim.job import AcSweep

__all__ = ["merge_rows", "merge_sweeps", "sweep_frequencies"]

_RELTOL = 1e-3  # ngspice's default RELTOL, which its ac loop uses as the end tolerance (acan.c)


def sweep_problem(sweep: AcSweep) -> str | None:
    """Why ngspice 39 cannot run ``sweep`` as meant, or None when it can."""
    start, stop, points = float(sweep.fstart_hz), float(sweep.fstop_hz), int(sweep.points)
    if sweep.kind not in ("dec", "lin"):
        return f"sweep kind must be 'dec' or 'lin', not {sweep.kind!r}"
    if points < 1 or not (math.isfinite(start) and math.isfinite(stop)) or start <= 0 or stop < start:
        return "need points >= 1 and 0 < fstart_hz <= fstop_hz"
    if sweep.kind == "dec" and math.floor(abs(math.log10(stop / start)) * points) < 1:
        return "a 'dec' sweep needs fstop_hz/fstart_hz >= 10**(1/points) (ngspice 39 hangs or returns nothing otherwise)"
    if sweep.kind == "lin" and points == 2:
        return "ngspice 39 runs 'ac lin 2' as a single point; use 1 or at least 3 points"
    return None


def sweep_frequencies(sweep: AcSweep) -> np.ndarray:
    """The points ngspice 39's ``ac`` visits for ``sweep`` (its acan.c stepping, tolerance included)."""
    problem = sweep_problem(sweep)
    if problem:
        raise ValueError(f"bad ac sweep {sweep}: {problem}")
    start, stop, points = float(sweep.fstart_hz), float(sweep.fstop_hz), int(sweep.points)
    out = []
    freq = start
    if sweep.kind == "dec":
        # ngspice 39 spreads whole steps evenly so that the last point is fstop.
        steps = math.floor(abs(math.log10(stop / start)) * points)
        delta = math.exp(math.log(stop / start) / steps)
        tol = delta * stop * _RELTOL
        while freq <= stop + tol:
            out.append(freq)
            freq *= delta
    else:
        delta = (stop - start) / (points - 1) if points - 1 > 1 else 0.0
        tol = delta * _RELTOL
        while freq <= stop + tol:
            out.append(freq)
            if delta == 0.0:
                break
            freq += delta
    return np.asarray(out, dtype=float)


def merge_sweeps(
    parts: Sequence[tuple[np.ndarray, Mapping[str, np.ndarray]]], rtol: float = 1e-9
) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """Concatenate sweeps in ascending frequency, keeping the first of points closer than ``rtol``."""
    if not parts:
        return np.zeros(0), {}
    freq = np.concatenate([np.asarray(f, dtype=float) for f, _ in parts])
    names = list(parts[0][1])
    vectors = {n: np.concatenate([np.asarray(v[n]) for _, v in parts]) for n in names}
    kept = _kept_order(freq, rtol)
    return freq[kept], {n: v[kept] for n, v in vectors.items()}


def merge_rows(parts: Sequence[tuple[np.ndarray, np.ndarray]], rtol: float = 1e-9) -> tuple[np.ndarray, np.ndarray]:
    """merge_sweeps for sweeps whose vectors are the rows of one array each (the same rows in every sweep): one
    concatenation and one selection for all of them."""
    if not parts:
        return np.zeros(0), np.zeros((0, 0), dtype=np.complex128)
    freq = np.concatenate([np.asarray(f, dtype=float) for f, _ in parts])
    kept = _kept_order(freq, rtol)
    return freq[kept], np.concatenate([rows for _, rows in parts], axis=1).take(kept, axis=1)


def _kept_order(freq: np.ndarray, rtol: float) -> np.ndarray:
    """Where each point of the merged sweep comes from in ``freq``: ascending (a stable sort), the first of points
    closer than ``rtol`` kept."""
    order = np.argsort(freq, kind="stable")
    ordered = freq[order]
    keep = np.ones(ordered.size, dtype=bool)
    if ordered.size > 1:
        keep[1:] = np.diff(ordered) > rtol * np.abs(ordered[1:])
    return order[keep]
