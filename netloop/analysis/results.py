"""Frozen result records of the stability analysis: what was found, with units in every name.

Conventions shared by every record here:

* ``T`` is Bode's return ratio with the sign chosen so that a negative-feedback loop has ``T``
  positive and real at low frequency; the closed loop's characteristic is ``1 + T``.
* Frequencies are in hertz (``*_hz``), angles in degrees (``*_deg``), gains in decibels of
  ``|T|`` (``*_db``, i.e. ``20 log10``), times in seconds (``*_s``); a name without a unit is a
  plain ratio.
* The phase of ``T`` is taken on its continuous branch, anchored on T's low-frequency asymptote
  C / s^k: the lowest sample lies within 180 degrees of arg(C) - 90 k, with arg(C) = 0 for
  negative feedback at DC and -180 for positive feedback. For a loop without integrators and
  with negative feedback the phase at the lowest swept frequency is thus in (-180, 180].
* ``None`` always means "this quantity does not exist for this loop" (for example no gain
  crossover, so no phase margin); the docstring of each field says when that happens.
  An infinite float is used only where the quantity exists and is infinite (peaking of a
  crossover with exactly zero phase margin).

These records only hold numbers: no printing or formatting happens here (that is netloop.report).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Literal

import numpy as np

__all__ = [
    "Check",
    "ClosedLoopPoles",
    "GainCrossover",
    "LoopAnalysis",
    "Margins",
    "NyquistVerdict",
    "Peaking",
    "PhaseCrossover",
    "Refinement",
    "SecondOrderEstimate",
]


# How flat T must be at the bottom of the sweep for |T| there to be called the DC loop gain (from memory: a single pole a
# decade above the bottom already gives -0.04 dB/decade and 5.7 deg, one at the bottom -3 dB/decade and 45 deg)
DC_FLAT_DB_PER_DEC = 1.0
DC_FLAT_DEG = 10.0
# A phase lead at the bottom of the sweep beyond this, with |T| > 1 there, is an AC coupling's zero below the sweep
# (from memory: a zero a decade below the bottom leads by 5.7 deg, the phase noise of a settled T is far below 1 deg)
AC_COUPLING_LEAD_DEG = 1.0

@dataclass(frozen=True, slots=True)
class GainCrossover:
    """A frequency where ``|T| = 1`` (0 dB), located by interpolation in log-frequency.

    freq_hz            where |T| = 1.
    phase_deg          angle of T there, on the continuous branch (see module docstring).
    phase_margin_deg   signed angular distance from T to -1 at this crossover, on the continuous
                       branch: 180 - |phase_deg| while |phase_deg| <= 180 (the loop has not
                       turned past -1; positive), else minus the distance from phase_deg to the
                       nearest odd multiple of 180. The low crossing of an AC-coupled loop with
                       +84 deg of lead reads +96 (not -96, as wrapping the phase would give).
                       The sign is the usual reading for loops with no open-loop RHP poles; the
                       Nyquist verdict decides stability.
    direction          "down" if |T| decreases through 1 with rising frequency, "up" otherwise.
    peaking_exact      |T / (1 + T)| at this crossover, linear: exactly 1 / (2 sin(|PM| / 2));
                       ``inf`` when the phase margin is exactly 0.
    peaking_db         20 log10(peaking_exact).
    peaking_small_angle  the small-angle approximation 1 / |PM in radians|, linear (``inf`` at 0).
    delay_margin_s     the smallest pure delay that would put -1 on the curve at this crossover:
                       ((phase_deg + 180) mod 360, in radians) / (2 pi freq_hz). With the
                       phase in (-180, 0], the usual case, this is PM / omega; with phase lead
                       (e.g. the low crossing of an AC-coupled loop) the delay must turn the
                       phase the long way round and is larger. None when phase_margin_deg <= 0
                       (an extra delay is then no longer a margin).
    """

    freq_hz: float
    phase_deg: float
    phase_margin_deg: float
    direction: Literal["down", "up"]
    peaking_exact: float
    peaking_db: float
    peaking_small_angle: float
    delay_margin_s: float | None


@dataclass(frozen=True, slots=True)
class PhaseCrossover:
    """A frequency where T is real and negative (phase = -180 deg + k 360 deg).

    freq_hz          where the phase crosses an odd multiple of 180 deg; 0.0 for the crossover at
                     DC of a loop with positive feedback at DC (T(0) negative real), whose gain is
                     read at the lowest swept frequency.
    phase_deg        that odd multiple of 180, on the continuous branch (e.g. -180, -540, 180).
    gain_db          20 log10 |T| there.
    gain_margin_db   -gain_db: the change of loop gain, in dB, that would put -1 on the curve at
                     this frequency. Positive for ``kind == "upper"``; negative for
                     ``kind == "lower"`` (the gain would have to FALL by -gain_margin_db).
    kind             "upper" when |T| < 1 here (raising the loop gain reaches -1),
                     "lower" when |T| >= 1 here (lowering the loop gain reaches -1).
    """

    freq_hz: float
    phase_deg: float
    gain_db: float
    gain_margin_db: float
    kind: Literal["upper", "lower"]


@dataclass(frozen=True, slots=True)
class Margins:
    """The summary margins of the loop (each from the crossovers above; None when it does not exist).

    phase_margin_deg         the worst (smallest) phase margin over all gain crossovers.
                             None when there is no gain crossover in the sweep.
    unity_gain_hz            frequency of the gain crossover that gives phase_margin_deg.
                             None when there is no gain crossover.
    gain_margin_db           upper gain margin: dB by which the loop gain may RISE before the
                             closed loop changes stability = the smallest gain_margin_db among the
                             "upper" phase crossovers (positive). For a loop that is unstable by
                             the Nyquist count it is instead the usual signed figure at the phase
                             crossover nearest 0 dB (negative when |T| > 1 there: the gain must fall
                             by that much). None when no phase crossover qualifies.
    phase_crossover_hz       frequency of the phase crossover that gives gain_margin_db.
    lower_gain_margin_db     lower gain margin (conditionally stable loops): dB by which the loop
                             gain may FALL before instability, a positive number = the smallest
                             gain_db among the "lower" phase crossovers. None when the loop has no
                             "lower" phase crossover or is unstable.
    lower_phase_crossover_hz frequency of the phase crossover that gives lower_gain_margin_db.
    modulus_margin           min over the sweep of |1 + T| (linear, 0..), interpolated between
                             samples. Always present.
    modulus_freq_hz          where that minimum is.
    delay_margin_s           the least delay_margin_s over the gain crossovers that have a
                             positive phase margin. None when no crossover has one.
    """

    phase_margin_deg: float | None
    unity_gain_hz: float | None
    gain_margin_db: float | None
    phase_crossover_hz: float | None
    lower_gain_margin_db: float | None
    lower_phase_crossover_hz: float | None
    modulus_margin: float
    modulus_freq_hz: float
    delay_margin_s: float | None


@dataclass(frozen=True, slots=True)
class Peaking:
    """The real peak of the closed-loop response |T / (1 + T)| over the sweep (interpolated).

    peak_db        20 log10 of the peak of |T/(1+T)| minus reference_db (>= 0 by construction
                   when the peak is at or above the reference; can be negative for a loop whose
                   closed-loop gain only falls below the reference).
    peak_freq_hz   where the peak is.
    reference_db   20 log10 |T/(1+T)| at the lowest swept frequency when |T| > 1 there (the
                   regulated low-frequency value); 0.0 (the ideal in-band value 1) when |T| <= 1
                   at the lowest frequency, as for AC-coupled or non-regulating loops.
    absolute_peak_db  20 log10 of the peak of |T/(1+T)| itself.
    """

    peak_db: float
    peak_freq_hz: float
    reference_db: float
    absolute_peak_db: float


@dataclass(frozen=True, slots=True)
class SecondOrderEstimate:
    """SECOND-ORDER ESTIMATES from the worst phase margin (textbook relations, not measurements).

    They are what a loop T = wn^2 / (s (s + 2 zeta wn)) with the same phase margin would have:
    PM = atan(2 zeta / sqrt(sqrt(1 + 4 zeta^4) - 2 zeta^2)), solved for zeta.

    phase_margin_deg   the phase margin used (Margins.phase_margin_deg), in (0, 90).
    damping_ratio      zeta of the equivalent second-order closed loop.
    q                  1 / (2 zeta), the closed-loop quality factor.
    overshoot_pct      step overshoot 100 exp(-pi zeta / sqrt(1 - zeta^2)); 0.0 when zeta >= 1.
    resonant_peak_db   20 log10(1 / (2 zeta sqrt(1 - zeta^2))); None when zeta >= 1/sqrt(2)
                       (no resonant peak).
    """

    phase_margin_deg: float
    damping_ratio: float
    q: float
    overshoot_pct: float
    resonant_peak_db: float | None


@dataclass(frozen=True, slots=True)
class NyquistVerdict:
    """Stability by the Nyquist criterion, counted from the sampled data and its mirror image.

    encirclements          N: net CLOCKWISE encirclements of -1 by T(j w), w over (-inf, inf),
                           the negative frequencies taken from conjugate symmetry.
    open_loop_rhp_poles    P: open-loop poles in the right half plane (poles of T itself).
    open_loop_rhp_from     where P comes from: "fit" (zeros of the rational fit of 1/(1+T), the
                           default), "given" (the caller's override) or "assumed" (0, in a draft
                           analysis between refinement rounds).
    closed_loop_rhp_poles  Z = N + P.
    stable                 Z == 0.
    reliable               False when the data cannot support the count (coarse sampling, a sweep
                           that ends with |T| not well below 1 or starts where T is not settled);
                           ``reasons`` then says why and the count is a best effort.
    reasons                one plain sentence per doubt; empty when reliable.
    origin_poles           poles of T at s = 0 inferred from the low-frequency slope of |T|
                           (integrators; negative for zeros at the origin, e.g. AC coupling);
                           the contour detours to the right of them.
    coarse_hz              (f_low, f_high) of each sample interval too coarse to count across (T's
                           phase steps too far, or 1 + T turns too fast near -1); the jobs sample
                           there more densely by themselves (netloop.analysis.refine). Empty when
                           none is.
    """

    encirclements: int
    open_loop_rhp_poles: int
    closed_loop_rhp_poles: int
    stable: bool
    reliable: bool
    reasons: tuple[str, ...]
    origin_poles: int
    open_loop_rhp_from: str = "given"
    coarse_hz: tuple[tuple[float, float], ...] = ()


@dataclass(frozen=True, slots=True)
class Check:
    """One self-check of a measurement: can its data support a verdict?

    A measurement with a failed check gets the verdict "inconclusive": never PASS, never "unstable".

    name     a short fixed word for the check (``nyquist-data``, ``rhp-count``, ...), listed in
             netloop.analysis.checks (and, for checks only a job can run, in that job).
    passed   whether the data passed it.
    detail   one sentence: what was found, with its figures.
    advice   what to try next when it failed ("" when it passed).
    """

    name: str
    passed: bool
    detail: str
    advice: str = ""


@dataclass(frozen=True, slots=True)
class ClosedLoopPoles:
    """Closed-loop poles from a rational (AAA) fit of S = 1 / (1 + T) on the data and its mirror.

    poles_rad_s          poles in rad/s (complex, s-plane), only those with |p| below the top of
                         the sweep (2 pi f_max), sorted by |p|; both members of a complex pair appear.
    rhp_count            how many of them have a positive real part.
    dominant_damping     damping ratio -Re(p)/|p| of the dominant pole when it is one of a complex pair
                         (netloop.analysis.poles.dominant_pole: the least-damped pole among those that visibly
                         shape 1/(1+T), the definition check, compare and every report use); None when the
                         dominant pole is real or there is none.
    dominant_q           1 / (2 dominant_damping) (inf when the damping is <= 0); None with it.
    dominant_freq_hz     |p| / (2 pi) of that pair; None with it.
    agrees_with_nyquist  rhp_count == NyquistVerdict.closed_loop_rhp_poles.
    fit_error            max |S_fit - S| / max(|S|) over the data: how well the fit holds.
    open_loop_rhp_poles_rad_s  the poles of T itself in the right half plane, found as zeros of
                         the same fit (S = D / (D + N) vanishes where T = N / D has a pole), within
                         the sweep: P, the open-loop right-half-plane pole count, read from the data.
    """

    poles_rad_s: tuple[complex, ...]
    rhp_count: int
    dominant_damping: float | None
    dominant_q: float | None
    dominant_freq_hz: float | None
    agrees_with_nyquist: bool
    fit_error: float
    open_loop_rhp_poles_rad_s: tuple[complex, ...] = ()


@dataclass(frozen=True, slots=True)
class LoopAnalysis:
    """Everything analyse() found about one loop.

    freq_hz, t               the data analysed (numpy arrays: float Hz ascending, complex T).
                             Excluded from == and hash.
    dc_gain_db               20 log10 |T| at the lowest swept frequency (the "DC loop gain").
    regulates                True when |T| > 1 somewhere in the sweep. False means "does not
                             regulate": the loop gain never reaches 0 dB, so there is no phase
                             margin (not "infinite margins").
    gain_crossovers          every |T| = 1 crossing, ascending frequency. Empty means "no
                             crossover": |T| never equals 1 inside the sweep (always above or
                             always below), and then margins.phase_margin_deg is None.
    phase_crossovers         every phase crossover with |T| above the numerical floor.
    ignored_phase_crossovers phase crossovers where |T| is below floor_db: phase is noise there;
                             they are counted here and never used as gain margins.
    floor_db                 the numerical floor used: a level of 20 log10 |T| (relative to the
                             probe's unit injection) below which phase is noise.
    margins, peaking         see Margins, Peaking.
    second_order             SecondOrderEstimate from the worst PM; None when there is no gain
                             crossover or the worst PM is not in (0, 90) deg.
    nyquist                  the stability verdict (see NyquistVerdict).
    poles                    ClosedLoopPoles, or None when the fit was not asked for or failed
                             (a warning then says why).
    warnings                 plain sentences about doubtful data or outcomes.
    checks                   the self-checks of the data (netloop.analysis.checks): when one fails
                             the classification is "inconclusive" and no verdict is given.
    """

    freq_hz: np.ndarray = field(compare=False, repr=False)
    t: np.ndarray = field(compare=False, repr=False)
    dc_gain_db: float
    regulates: bool
    gain_crossovers: tuple[GainCrossover, ...]
    phase_crossovers: tuple[PhaseCrossover, ...]
    ignored_phase_crossovers: tuple[PhaseCrossover, ...]
    floor_db: float
    margins: Margins
    peaking: Peaking
    second_order: SecondOrderEstimate | None
    nyquist: NyquistVerdict
    poles: ClosedLoopPoles | None
    warnings: tuple[str, ...]
    checks: tuple[Check, ...] = ()

    @property
    def gain_is_dc(self) -> bool:
        """Whether ``dc_gain_db`` stands for DC: no poles of T at s = 0, and T flat at the bottom of the sweep (|T|
        within DC_FLAT_DB_PER_DEC over the lowest 3 samples, its phase within DC_FLAT_DEG of 0 or 180 deg); else it is
        only |T| at the lowest frequency swept (a sweep started above a pole, or an AC coupling: a phase lead beyond
        AC_COUPLING_LEAD_DEG where |T| > 1)."""
        from netloop.analysis.response import low_frequency_slope  # noqa: PLC0415 - records stay import-light

        f = np.asarray(self.freq_hz, dtype=float)
        t = np.asarray(self.t, dtype=complex)
        if self.nyquist.origin_poles != 0 or f.size < 3 or not np.all(np.abs(t[:3]) > 0):
            return False
        _, slope = low_frequency_slope(np.log10(f[:3]), 20.0 * np.log10(np.abs(t[:3])))
        off_axis = abs(math.degrees(math.atan(t[0].imag / t[0].real))) if t[0].real != 0 else 90.0
        coupled = abs(t[0]) > 1.0 and t[0].real > 0 and math.degrees(math.atan2(t[0].imag, t[0].real)) > AC_COUPLING_LEAD_DEG
        return abs(slope) <= DC_FLAT_DB_PER_DEC and off_axis <= DC_FLAT_DEG and not coupled

    @property
    def supported(self) -> bool:
        """Whether every self-check passed, so that the data supports a verdict."""
        return all(c.passed for c in self.checks)

    @property
    def largest_gain_db(self) -> float:
        """The largest |T| of the sweep in dB (what a loop that does not regulate reaches at most)."""
        return float(np.max(20.0 * np.log10(np.abs(self.t) + 1e-300)))

    @property
    def stable(self) -> bool:
        """The Nyquist verdict (check ``nyquist.reliable`` before trusting it)."""
        return self.nyquist.stable

    @property
    def phase_deg(self) -> np.ndarray:
        """Phase of t in degrees on the branch every margin here was read on (see the module docstring)."""
        from netloop.analysis.response import anchored_phase_deg  # noqa: PLC0415 - records stay import-light

        return anchored_phase_deg(np.asarray(self.t, dtype=complex), self.nyquist.origin_poles)

    @property
    def classification(self) -> Literal["inconclusive", "unstable", "does not regulate", "stable"]:
        """One word for the loop: inconclusive (a self-check failed: no verdict), unstable (by Nyquist),
        does not regulate (|T| < 1 throughout), or stable."""
        if not self.supported:
            return "inconclusive"
        if not self.nyquist.stable:
            return "unstable"
        if not self.regulates:
            return "does not regulate"
        return "stable"


@dataclass(frozen=True, slots=True)
class Refinement:
    """The outcome of refine(): the final analysis and how the phase margin settled.

    analysis                  the LoopAnalysis of the merged, refined data.
    rounds                    how many times new frequencies were evaluated.
    points_added              how many frequencies were added in total.
    converged                 True when every phase margin moved by less than the tolerance in
                              the last round, with as many crossovers as the round before, and the
                              Nyquist count found the samples dense enough everywhere (no
                              NyquistVerdict.coarse_hz); or when there was nothing to refine (no
                              gain crossover and no coarse interval).
    last_change_deg           the largest |change| of a phase margin in the last round; None when
                              there was no round, no crossover, or the round changed their number.
    """

    analysis: LoopAnalysis
    rounds: int
    points_added: int
    converged: bool
    last_change_deg: float | None
