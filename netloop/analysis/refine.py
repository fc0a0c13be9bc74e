"""Adaptive refinement: ask the caller for more samples around each crossover until the margins settle.

The engine never simulates: the caller passes ``evaluate(new_freqs_hz) -> T`` (the probe layer
re-simulates at exactly those frequencies). propose_frequencies() is the pure half of the job, so
a caller can batch the proposals of several loops into one simulator call.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from netloop.analysis.engine import DEFAULT_FLOOR_DB, analyse, analyse_draft, finish
from netloop.analysis.results import LoopAnalysis, Refinement
from netloop.errors import AnalysisError

__all__ = ["propose_frequencies", "refine"]


def _brackets(analysis: LoopAnalysis) -> list[int]:
    """Indices i such that a crossover lies in [f_i, f_i+1) (clipped to the first and last interval)."""
    f = analysis.freq_hz
    events = [c.freq_hz for c in analysis.gain_crossovers] + [c.freq_hz for c in analysis.phase_crossovers if c.freq_hz > 0.0]
    idx = np.clip(np.searchsorted(f, events, side="right") - 1, 0, f.size - 2)
    return sorted(set(int(i) for i in idx))


def propose_frequencies(freq_hz, t, *, points_per_interval: int = 3, analysis: LoopAnalysis | None = None, **analyse_kwargs) -> np.ndarray:
    """New frequencies (Hz, ascending, none already sampled) that subdivide each crossover's interval and its neighbours,
    and every interval the Nyquist count found too coarse (NyquistVerdict.coarse_hz).

    Each interval [f_i, f_i+1) that holds a gain or phase crossover (above the floor; not the one
    at DC of a loop with positive feedback there; the first and last intervals also hold a crossover
    read a rounding error outside the sweep), and the interval on either side of it, is split into
    points_per_interval + 1 equal steps in log f; so is each coarse interval.
    Returns an empty array when there is no crossover and no coarse interval.
    """
    if analysis is None:
        analysis = analyse(freq_hz, t, draft=True, **analyse_kwargs)  # what the proposals read: the crossovers and the count
    x = np.log10(analysis.freq_hz)
    chosen: set[int] = set()
    for i in _brackets(analysis):
        chosen.update(j for j in (i - 1, i, i + 1) if 0 <= j < x.size - 1)
    # where the Nyquist count found the samples too coarse to count across ("sample more densely there")
    lows = [low for low, _ in analysis.nyquist.coarse_hz]
    chosen.update(int(i) for i in np.searchsorted(analysis.freq_hz, lows) if 0 <= i < x.size - 1)
    frac = np.arange(1, points_per_interval + 1) / (points_per_interval + 1)
    new = [x[j] + (x[j + 1] - x[j]) * frac for j in sorted(chosen)]
    if not new:
        return np.empty(0)
    out = 10.0 ** np.concatenate(new)
    out = out[~np.isin(out, analysis.freq_hz)]
    return np.unique(out)


def _merge(f: np.ndarray, t: np.ndarray, f_new: np.ndarray, t_new: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    ff = np.concatenate([f, f_new])
    tt = np.concatenate([t, t_new])
    order = np.argsort(ff, kind="stable")
    ff, tt = ff[order], tt[order]
    keep = np.concatenate([[True], np.diff(ff) > 0])
    return ff[keep], tt[keep]


def _pms(a: LoopAnalysis) -> np.ndarray:
    return np.array([c.phase_margin_deg for c in a.gain_crossovers])


def _nothing_to_refine(a: LoopAnalysis) -> bool:
    """No gain crossover whose margin could move, and no interval the Nyquist count found too coarse."""
    return not a.gain_crossovers and not a.nyquist.coarse_hz


def refine(
    evaluate: Callable[[np.ndarray], np.ndarray],
    freq_hz,
    t,
    *,
    tol_deg: float = 1e-4,
    max_rounds: int = 8,
    points_per_interval: int = 3,
    open_loop_rhp_poles: int | None = None,
    floor_db: float = DEFAULT_FLOOR_DB,
    fit_poles: bool = True,
) -> Refinement:
    """Add samples around every crossover, and in every interval the Nyquist count found too coarse,
    until each phase margin moves by less than tol_deg in a round and no interval is too coarse
    (or no crossover and no coarse interval is left).

    evaluate(new_freqs_hz) must return T at exactly those frequencies (same length, complex);
    AnalysisError otherwise. A round whose crossovers differ in number from the previous one is
    never taken as converged, nor one after which the Nyquist count still asks for denser samples
    (NyquistVerdict.coarse_hz: a resonance between samples can hide two crossovers while the
    margins of the others settle). When no new frequency can be added (samples a rounding error
    apart) refine() stops unconverged. The returned analysis is of all samples merged (fit_poles as given).
    """
    kwargs = {"open_loop_rhp_poles": open_loop_rhp_poles, "floor_db": floor_db}
    f = np.asarray(freq_hz, dtype=float)
    tt = np.asarray(t, dtype=complex)
    current = analyse_draft(f, tt, **kwargs)  # each round reads a draft; the last one is finished
    rounds = added = 0
    change: float | None = None
    converged = _nothing_to_refine(current.analysis)
    while not converged and rounds < max_rounds:
        new = propose_frequencies(f, tt, points_per_interval=points_per_interval, analysis=current.analysis)
        if new.size == 0:
            break
        t_new = np.asarray(evaluate(new), dtype=complex)
        if t_new.shape != new.shape:
            raise AnalysisError(f"evaluate() returned {t_new.shape} values for {new.size} frequencies; expected one T per frequency")
        f, tt = _merge(f, tt, new, t_new)
        rounds += 1
        added += int(new.size)
        previous = current
        current = analyse_draft(f, tt, **kwargs)
        before, after = _pms(previous.analysis), _pms(current.analysis)
        change = float(np.max(np.abs(after - before))) if before.size == after.size and after.size else None
        converged = _nothing_to_refine(current.analysis) or (change is not None and change < tol_deg and not current.analysis.nyquist.coarse_hz)
    return Refinement(finish(current, fit_poles=fit_poles), rounds, added, converged, change)
