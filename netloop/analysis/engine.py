"""analyse(): every crossover, the margins, the Nyquist verdict, peaking and closed-loop poles of one loop."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from netloop.analysis.checks import data_checks, nyquist_checks
from netloop.analysis.closed_loop import closed_loop_peaking, modulus_margin
from netloop.analysis.crossovers import dc_phase_crossover, find_gain_crossovers, find_phase_crossovers
from netloop.analysis.margins import summarise_margins
from netloop.analysis.nyquist import nyquist_verdict
from netloop.analysis.poles import DEFAULT_RTOL, closed_loop_poles, disagreement, fits_count
from netloop.analysis.response import Response
from netloop.analysis.results import AC_COUPLING_LEAD_DEG, Check, LoopAnalysis, NyquistVerdict, Peaking
from netloop.analysis.second_order import second_order_estimate
from netloop.errors import AnalysisError

__all__ = ["DEFAULT_FLOOR_DB", "Draft", "analyse", "analyse_draft", "finish"]

DEFAULT_FLOOR_DB = -120.0
"""Numerical floor of |T| in dB, relative to the probe's unit injection (so an absolute level of |T|).

Where |T| is small, Tian's numerator -(va1 + ib2) is a small difference of node voltages and
currents of the order of the unit injection, so its error is absolute, of the order of the
simulator's precision relative to that unit; with solutions good to about 1e-6 of it, |T| below
-120 dB carries no phase information. Phase crossovers below the
floor are counted in LoopAnalysis.ignored_phase_crossovers and never become gain margins."""


def analyse(
    freq_hz,
    t,
    *,
    open_loop_rhp_poles: int | None = None,
    floor_db: float = DEFAULT_FLOOR_DB,
    fit_poles: bool = True,
    pole_fit_rtol: float = DEFAULT_RTOL,
    draft: bool = False,
) -> LoopAnalysis:
    """Analyse the loop whose return ratio T was sampled at freq_hz (Hz, ascending, positive).

    open_loop_rhp_poles  P, the poles of T in the right half plane. None (the default): read from
                         the data, as the right-half-plane zeros of the rational fit of 1/(1+T)
                         (netloop.analysis.poles); 0 in a draft or without the fit. A number
                         overrides it (known from the design). Z = N + P decides stability.
    floor_db             numerical floor of |T| in dB (DEFAULT_FLOOR_DB); phase crossovers below it
                         are ignored and counted.
    fit_poles            also fit the closed-loop poles (AAA on 1/(1+T)); a second verdict.
    pole_fit_rtol        relative tolerance of that fit.
    draft                only what a refinement round reads: every crossover, the margins and the
                         Nyquist verdict; the modulus margin and peaking are NaN, with no estimate
                         and no poles (about a third of the time). Never for a report.

    The whole analysis is a draft (analyse_draft) finished (finish); a caller that drafts between
    rounds finishes its last draft instead of analysing the same data again.

    Outcomes worth knowing (each pinned by a test):
    * |T| < 1 everywhere: regulates is False ("does not regulate"), no gain crossover, phase
      margin None, the Nyquist verdict stable (with P = 0).
    * |T| > 1 everywhere, or a sweep that ends before |T| falls below 1: no (final) crossover,
      a warning, and the Nyquist verdict marked unreliable.
    * positive feedback at DC (T negative real at low frequency): a warning, and a phase
      crossover at freq_hz = 0.0 with the gain at the lowest frequency (T(0) lies on the negative
      real axis); the Nyquist count decides (|T(0)| > 1 with P = 0 is unstable).
    * integrators (poles of T at s = 0): read from the low-frequency slope; the Nyquist contour
      detours to the right of s = 0 (see netloop.analysis.nyquist).
    * a measurement the data cannot support (a doubtful Nyquist count, Z = N + P < 0): a failed
      self-check in ``checks`` and the classification "inconclusive" (netloop.analysis.checks).
    * NaN or infinite T: AnalysisError naming the first bad frequency (never dropped).
    """
    first = analyse_draft(freq_hz, t, open_loop_rhp_poles=open_loop_rhp_poles, floor_db=floor_db)
    return first.analysis if draft else finish(first, fit_poles=fit_poles, pole_fit_rtol=pole_fit_rtol)


@dataclass(frozen=True, slots=True)
class Draft:
    """A draft analysis and what finishing it reads again: the checked data with its interpolants, and whether P was given.

    analysis   what analyse(..., draft=True) returns on the same data.
    response   the checked data and its splines, which the modulus margin, the peaking and the pole fit read.
    rhp_given  True when the caller gave P (open_loop_rhp_poles); False when the pole fit is to read it.
    """

    analysis: LoopAnalysis
    response: Response
    rhp_given: bool


def analyse_draft(freq_hz, t, *, open_loop_rhp_poles: int | None = None, floor_db: float = DEFAULT_FLOOR_DB) -> Draft:
    """The draft analysis of analyse(freq_hz, t, draft=True) (its ``analysis``), kept with what finish() reads to complete it."""
    given = open_loop_rhp_poles is not None
    if given and (int(open_loop_rhp_poles) != open_loop_rhp_poles or open_loop_rhp_poles < 0):
        raise AnalysisError(f"open_loop_rhp_poles must be a whole number >= 0, got {open_loop_rhp_poles!r}")
    resp = Response.from_data(freq_hz, t)
    warnings: list[str] = []
    floor_abs_db = float(floor_db)

    gains = find_gain_crossovers(resp)
    phases, ignored = find_phase_crossovers(resp, floor_abs_db)
    nyquist, dc_sign = nyquist_verdict(resp, int(open_loop_rhp_poles) if given else 0, floor_abs_db)
    if not given:
        nyquist = replace(nyquist, open_loop_rhp_from="assumed")

    if dc_sign == "negative" and nyquist.origin_poles == 0 and resp.gain_db[0] >= floor_abs_db:
        # T(0) is real and negative: the curve starts on the negative real axis, a phase crossover at DC
        phases = (dc_phase_crossover(resp), *phases)
    warnings.extend(nyquist.reasons)
    regulates = bool(np.any(resp.gain_db > 0.0))
    if not regulates:
        warnings.append(f"the loop gain never reaches 0 dB (at most {float(np.max(resp.gain_db)):.4g} dB): the loop does not regulate")
    if dc_sign == "negative":
        warnings.append("T is negative at low frequency: positive feedback at DC")
    lead = float(resp.phase_deg[0])
    if nyquist.origin_poles == 0 and dc_sign != "negative" and resp.gain_db[0] > 0.0 and lead > AC_COUPLING_LEAD_DEG:
        # T leads at the bottom of the sweep with |T| > 1: it falls toward DC, and crosses 0 dB somewhere below the sweep
        warnings.append(f"|T| is {float(resp.gain_db[0]):.4g} dB at {float(resp.freq_hz[0]):.4g} Hz, the bottom of the sweep, and "
                        f"its phase leads by {lead:.2g} deg: T falls toward DC (AC coupling), and its low gain crossover, "
                        "with its own phase margin, lies below the sweep; start the sweep lower")
    if ignored:
        warnings.append(
            f"{len(ignored)} phase crossover(s) below the numerical floor ({floor_abs_db:.4g} dB) ignored: the phase is noise there"
        )
    analysis = LoopAnalysis(
        freq_hz=resp.freq_hz,
        t=resp.t,
        dc_gain_db=float(resp.gain_db[0]),
        regulates=regulates,
        gain_crossovers=gains,
        phase_crossovers=phases,
        ignored_phase_crossovers=ignored,
        floor_db=floor_abs_db,
        margins=summarise_margins(gains, phases, nyquist.stable, (math.nan, math.nan)),
        peaking=Peaking(math.nan, math.nan, math.nan, math.nan),
        second_order=None,
        nyquist=nyquist,
        poles=None,
        warnings=tuple(warnings),
        checks=_checks(resp, nyquist),
    )
    return Draft(analysis, resp, given)


def finish(draft: Draft, *, fit_poles: bool = True, pole_fit_rtol: float = DEFAULT_RTOL) -> LoopAnalysis:
    """The whole analysis of the draft's data, as analyse() gives it: what the draft found, with the modulus margin, the
    peaking, the second-order estimate and (fit_poles) the closed-loop poles, P read from their fit unless it was given."""
    resp, a = draft.response, draft.analysis
    nyquist = a.nyquist
    pole_notes: tuple[str, ...] = ()
    poles = None
    if fit_poles:
        poles, notes = closed_loop_poles(resp.freq_hz, resp.t, nyquist.closed_loop_rhp_poles, pole_fit_rtol)
        if poles is not None and not draft.rhp_given:  # P from the data: the fit's right-half-plane zeros are T's own poles
            p = len(poles.open_loop_rhp_poles_rad_s)
            z = nyquist.encirclements + p
            old = disagreement(poles.rhp_count, nyquist.closed_loop_rhp_poles, float(resp.freq_hz[-1]))
            nyquist = replace(nyquist, open_loop_rhp_poles=p, closed_loop_rhp_poles=z, stable=z == 0, open_loop_rhp_from="fit")
            notes = tuple(n for n in notes if n != old)
            agrees = fits_count(poles.poles_rad_s, z)
            if not agrees:
                notes = (*notes, disagreement(poles.rhp_count, z, float(resp.freq_hz[-1])))
            poles = replace(poles, agrees_with_nyquist=agrees)
        pole_notes = notes
    margins = summarise_margins(a.gain_crossovers, a.phase_crossovers, nyquist.stable, modulus_margin(resp))
    return replace(
        a,
        margins=margins,
        peaking=closed_loop_peaking(resp),
        second_order=second_order_estimate(margins.phase_margin_deg),
        nyquist=nyquist,
        poles=poles,
        warnings=(*a.warnings, *pole_notes),
        checks=_checks(resp, nyquist, None if poles is None or draft.rhp_given or poles.agrees_with_nyquist else poles.rhp_count),
    )


def _checks(resp: Response, nyquist: NyquistVerdict, fit_rhp: int | None = None) -> tuple[Check, ...]:
    """The self-checks of the data and of its Nyquist count (netloop.analysis.checks); ``fit_rhp``: the closed-loop
    right-half-plane poles of the fit that P was read from."""
    return (*data_checks(resp.freq_hz, resp.gain_db), *nyquist_checks(nyquist, fit_rhp))
