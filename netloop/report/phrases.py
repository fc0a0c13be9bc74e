"""The wording of the figures of one loop, shared by the text summary and the HTML page: (label, value) pairs."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from netloop.analysis.requirements import METRICS, RequirementOutcome
from netloop.analysis.results import LoopAnalysis, PhaseCrossover
from netloop.analysis.poles import unsettled_rhp
from netloop.analysis.second_order import resonant_peak_db
from netloop.jobs.document import worst_crossover
from netloop.report.notation import db, deg, eng, number, ratio_db, requirement_value

__all__ = [
    "closed_loop_phrases",
    "low_gain_phrase",
    "margin_phrases",
    "nyquist_phrase",
    "origin_phrase",
    "phase_crossover_margin",
    "practice_phrase",
    "regulation_phrase",
]

PRACTICE = "common practice, no source: PM 45-60 deg, GM 10 dB, peaking under 3 dB"


def _at(freq_hz: float | None) -> str:
    """" at 1.2 MHz", " at DC" (as the crossover rows name a crossover at 0 Hz), or "" without a frequency."""
    if freq_hz is None:
        return ""
    return " at DC" if freq_hz == 0 else f" at {eng(freq_hz, 'Hz')}"


def _plain_number(x: float) -> str:
    """A ratio with three decimals, or in 4 significant digits with an exponent when it is that large (1e300 stays one line)."""
    return f"{x:.3f}" if abs(x) < 1e6 else f"{x:.4g}"


def low_gain_phrase(a: LoopAnalysis) -> tuple[str, str]:
    """("DC loop gain", value) when |T| at the bottom of the sweep stands for DC (LoopAnalysis.gain_is_dc), else the
    label says it is |T| at the lowest frequency swept, and at which (a sweep started above a pole reads less)."""
    if a.gain_is_dc:
        return "DC loop gain", db(a.dc_gain_db)
    return "|T| at the lowest frequency", f"{db(a.dc_gain_db)} at {eng(float(a.freq_hz[0]), 'Hz')} (not the DC loop gain: T is not flat there)"


def margin_phrases(a: LoopAnalysis) -> list[tuple[str, str]]:
    """Worst phase margin, gain margin, lower gain margin (when there is one), modulus and delay margin."""
    m = a.margins
    no_pm = "none (the loop does not regulate)" if not a.regulates else "none (no gain crossover in the sweep)"
    rows = [
        ("worst phase margin", f"{deg(m.phase_margin_deg)}{_at(m.unity_gain_hz)}" if m.phase_margin_deg is not None else no_pm),
        ("gain margin", f"{db(m.gain_margin_db)}{_at(m.phase_crossover_hz)}" if m.gain_margin_db is not None else "none (no upper phase crossover)"),
    ]
    if m.lower_gain_margin_db is not None:
        rows.append(("lower gain margin", f"{db(m.lower_gain_margin_db)}{_at(m.lower_phase_crossover_hz)} (the gain may fall this much)"))
    rows.append(("modulus margin", f"{_plain_number(m.modulus_margin)} ({db(ratio_db(m.modulus_margin))}) min |1+T|{_at(m.modulus_freq_hz)}"))
    rows.append(("delay margin", eng(m.delay_margin_s, "s") if m.delay_margin_s is not None else "none (no crossover with a positive phase margin)"))
    return rows


def closed_loop_phrases(a: LoopAnalysis) -> list[tuple[str, str]]:
    """The closed loop, measured figures first: the peaking of T/(1+T), |T/(1+T)| at the worst crossover, the poles fitted to
    the measured 1/(1+T) (the dominant one as netloop.analysis.poles.dominant_pole defines it) and, when the fitted pair
    alone would peak otherwise than measured, why; the second-order estimate from the phase margin only when no poles
    were fitted (nothing measured then gives the damping)."""
    p = a.peaking
    worst = worst_crossover(a)
    rows = [("closed-loop peaking", f"{db(p.peak_db)} at {eng(p.peak_freq_hz, 'Hz')} (relative to {db(p.reference_db)} in band)")]
    if worst is not None:
        rows.append(("|T/(1+T)| at worst crossover", db(worst.peaking_db)))
    poles = a.poles
    if poles is None:
        rows.append(("closed-loop poles", "not fitted"))
        s = a.second_order
        if s is not None:
            res = "no resonant peak" if s.resonant_peak_db is None else f"resonant peak {db(s.resonant_peak_db)}"
            rows.append(("2nd-order ESTIMATE", f"damping {s.damping_ratio:.3f}, Q {s.q:.3f}, overshoot {s.overshoot_pct:.1f} %, {res} "
                                               "(from PM alone, as if the loop had two poles: no poles were fitted)"))
        return rows
    if poles.dominant_freq_hz is None:
        dom = "dominant pole real (no complex pair shapes 1/(1+T))"
    else:
        dom = f"dominant pair {eng(poles.dominant_freq_hz, 'Hz')}, damping {number(poles.dominant_damping)}, Q {number(poles.dominant_q)}"
    agree = "agrees with" if poles.agrees_with_nyquist else "DISAGREES with"
    unsettled = unsettled_rhp(poles.poles_rad_s)
    rhp = f"{poles.rhp_count} in the RHP" + (f", {unsettled} of them within 0.1 % of the imaginary axis, whose side the fit does not "
                                             "settle" if unsettled else "")
    rows.append(("closed-loop poles", f"{dom}; {rhp} ({agree} Nyquist; fitted to the measured 1/(1+T), "
                                      f"fit error {poles.fit_error:.2g})"))
    alone = None if poles.dominant_damping is None else resonant_peak_db(poles.dominant_damping)
    if alone is not None and abs(alone - p.peak_db) > PEAK_AGREE_DB:
        rows.append(("why these differ", f"the dominant pair alone would peak {db(alone)}; the measured peaking is the whole "
                                         "loop's, which its other poles and zeros shape too"))
    return rows


# The measured peaking and the dominant pair's own peak are said to differ beyond this (our choice: a tenth of the 3 dB
# of common practice would be lost in the rounding of a report; 1 dB is not)
PEAK_AGREE_DB = 1.0


def phase_crossover_margin(c: PhaseCrossover, stable: bool) -> str:
    """The margin a phase crossover gives, as a designer reads it: "GM 12.10 dB" (the gain may rise that much),
    "lower GM 46.54 dB" (a stable loop whose gain may fall that much), or the signed "GM -10.44 dB" of an unstable loop."""
    if c.kind == "lower" and stable:
        return f"lower GM {db(c.gain_db)}"
    return f"GM {db(c.gain_margin_db)}"


def nyquist_phrase(a: LoopAnalysis) -> str:
    """The Nyquist count in one line: N, P, Z and the verdict."""
    n = a.nyquist
    word = "stable" if n.stable else "UNSTABLE"
    source = {"fit": " (read from the data)", "given": " (given)", "assumed": " (assumed)"}.get(n.open_loop_rhp_from, "")
    text = (f"{word}: N = {n.encirclements} clockwise encirclement(s) of -1, P = {n.open_loop_rhp_poles}{source}, "
            f"Z = N + P = {n.closed_loop_rhp_poles}")
    if n.origin_poles:
        text += f" ({origin_phrase(n.origin_poles)})"
    return text


def origin_phrase(origin_poles: int) -> str:
    """ "2 pole(s) of T at s = 0 (integrators)" or, for a negative count, "1 zero(s) of T at s = 0 (AC coupling)"."""
    if origin_poles > 0:
        return f"{origin_poles} pole(s) of T at s = 0 (integrators)"
    return f"{-origin_poles} zero(s) of T at s = 0 (AC coupling)"


def regulation_phrase(a: LoopAnalysis, *, advise: bool = True) -> str:
    """What "does not regulate" means for this loop and (``advise``) what to do if it should regulate."""
    peak = float(np.max(np.abs(a.t))) if len(a.t) else 0.0
    text = f"does not regulate: |T| stays below 0 dB (at most {db(ratio_db(peak))}), so there is no phase margin"
    if advise:
        text += "; if it should regulate, check the break node, the driver side and the bias; --require 'dc>=40' makes this a failure"
    return text


def practice_phrase(shortfalls: Sequence[RequirementOutcome]) -> str:
    """ "below common practice (no requirement given; ...): gain margin 4.65 dB, closed-loop peaking 7.11 dB"."""
    missed = ", ".join(f"{METRICS[o.requirement.metric][0]} {requirement_value(METRICS[o.requirement.metric][1], o.value)}"
                       for o in shortfalls)
    return f"below common practice (no requirement given; {PRACTICE}): {missed}"
