"""The Nyquist count: net encirclements of -1 by T over the whole imaginary axis, from sampled data.

The contour runs up the imaginary axis, detouring to the right of any poles of T at s = 0, and
closes through +infinity. The data covers [f_min, f_max]; the negative frequencies are its mirror
image (T(-jw) = conj T(jw)). Two pieces are not sampled and are closed by assumption:

* the top, beyond f_max: assumed to stay well inside the unit circle. Reliable only when
  |T(f_max)| is at most TOP_LIMIT_DB (-20 dB); the angle of 1 + T then barely moves.
* the bottom, below f_min: T is taken to follow its low-frequency asymptote C / s^k, with k
  (origin_poles, integrators; negative for zeros at the origin) read from the slope of |T| over
  the lowest samples and the sign of C from the phase there. Along the detour the phase of T
  turns by -180 k degrees through the direction of C, at the magnitude |T(f_min)|. Reliable only
  when the bottom is settled: the slope within SLOPE_TOL_DB_PER_DEC of -20 k dB/decade, the phase
  within PHASE_TOL_DEG of the asymptote's, and no unity crossing hidden below the sweep
  (|T| < 1 with integrators, or |T| > 1 with zeros at the origin), and the detour does not pass
  closer to -1 than its model can be trusted (|T(f_min)| times the phase residual's sine plus
  the slope residual / 17, the change a pole just above f_min still leaves, plus 0.1 %).

Counting is by the angle of 1 + T (not of T): its total turn is -360 (Z - P) degrees, so the
clockwise encirclements are N = Z - P and Z = N + P. The angle is followed along the
interpolated curve (16 points per sample interval, see netloop.analysis.response), which is
trustworthy while T's own phase moves less than 60 degrees between samples; where it moves more
(above the numerical floor), or where the angle of 1 + T still jumps by more than 90 degrees
between neighbouring points (T passes very close to -1), the count is reported as unreliable.
Far above crossover, where |T| sinks into numerical noise, 1 + T is close to 1 and the noise
cannot change the count.
"""

from __future__ import annotations

import math

import numpy as np

from netloop.analysis.response import Response
from netloop.analysis.results import NyquistVerdict

__all__ = ["PHASE_TOL_DEG", "RESOLVED_MAX_DB", "SLOPE_TOL_DB_PER_DEC", "TOP_LIMIT_DB", "nyquist_verdict", "origin_poles"]

TOP_LIMIT_DB = -20.0
SLOPE_TOL_DB_PER_DEC = 6.0
PHASE_TOL_DEG = 30.0
_MAX_STEP_DEG = 90.0
_MAX_T_STEP_DEG = 60.0
_DENSE = 16
_ARC_MODEL_DOUBT = 1e-3  # relative doubt in the asymptote even when the bottom looks settled
_ARC_POINTS = 2001


RESOLVED_MAX_DB = 240.0
"""|T| above which the sampled T no longer resolves the loop: the sweep is not widened further down to settle it
(netloop.jobs.measure), and a jump of T's phase there asks for a sweep that starts higher, not for denser samples.

T comes from two AC runs in which the closed loop cancels the probe's excitation to about 1/|T| of it, so double
precision (eps 2.2e-16) leaves T a relative error of about |T| eps. Measured on a phase-domain charge-pump PLL (two
integrators and a 1 T leak on the filter node, tests/jobs/measure/test_resolution_ceiling.py) against its closed form:
1.3e-4 at 241 dB, 3e-3 at 281 dB; above 1/eps (313 dB) |T| saturates (312.75 dB read where the closed form gives
319.7 dB) and its phase jumps by 74 deg between neighbouring samples, however densely they are taken. Where the
bottom of the sweep is already this high, T's low-frequency asymptote (below) closes the contour."""

_HARMLESS_BOTTOM_DB = -20.0
"""An unsettled bottom of the sweep does not cast doubt on the count when |T| there is at most this
(0.1) and falls toward DC: the unswept part then stays inside a small disc, far from -1."""


def _wrap(a):
    """Angles (rad) wrapped into (-pi, pi]."""
    return -np.remainder(-np.asarray(a) + np.pi, 2 * np.pi) + np.pi


def origin_poles(resp: Response) -> tuple[int, float]:
    """(k, slope): poles of T at s = 0 from the slope (dB/decade) over the lowest samples."""
    return resp.bottom


def _bottom_arc(t0: complex, k: int) -> tuple[np.ndarray, float, str]:
    """T along the detour below f_min (from -j f_min to +j f_min), the phase residual, and C's sign."""
    phi0 = math.degrees(np.angle(t0))
    # asymptote phase at +j f_min is c - 90 k with c in {0, 180}: choose the c that fits best
    residuals = {c: math.degrees(_wrap(math.radians(phi0 - (c - 90.0 * k)))) for c in (0.0, 180.0)}
    c = min(residuals, key=lambda key: abs(residuals[key]))
    delta = residuals[c]
    theta = np.linspace(-90.0, 90.0, _ARC_POINTS)
    angle = c - k * theta + delta * theta / 90.0
    arc = abs(t0) * np.exp(1j * np.radians(angle))
    return arc, delta, "negative" if c == 180.0 else "positive"


def nyquist_verdict(resp: Response, open_loop_rhp_poles: int = 0, floor_abs_db: float = -120.0) -> tuple[NyquistVerdict, str]:
    """Count encirclements of -1; returns the verdict and the sign of T's low-frequency asymptote.

    The sign is "positive" (negative feedback at DC), "negative" (positive feedback at DC) or
    "unknown" when the bottom of the sweep is not settled.
    """
    reasons: list[str] = []
    t = resp.t
    z = 1.0 + t
    # the samples must be dense enough for the interpolant: T's own phase may not step by more
    # than _MAX_T_STEP_DEG between samples where |T| is above the numerical floor
    t_steps = np.abs(np.diff(resp.phase_deg))
    audible = (resp.gain_db[:-1] >= floor_abs_db) | (resp.gain_db[1:] >= floor_abs_db)
    jumps = (t_steps > _MAX_T_STEP_DEG) & audible
    unresolved = jumps & (resp.gain_db[:-1] > RESOLVED_MAX_DB) & (resp.gain_db[1:] > RESOLVED_MAX_DB)
    coarse = jumps & ~unresolved  # denser samples can settle these; not the jumps of rounding noise
    if np.any(coarse):
        i = int(np.argmax(coarse))
        reasons.append(
            f"the phase of T steps by more than {_MAX_T_STEP_DEG:g} deg between samples "
            f"({int(coarse.sum())} place(s), first between {resp.freq_hz[i]:.4g} and {resp.freq_hz[i + 1]:.4g} Hz); "
            "sample more densely there"
        )
    if np.any(unresolved):
        i = int(np.argmax(unresolved))
        reasons.append(
            f"the phase of T jumps by more than {_MAX_T_STEP_DEG:g} deg between samples where |T| is above "
            f"{RESOLVED_MAX_DB:g} dB ({int(unresolved.sum())} place(s), first between {resp.freq_hz[i]:.4g} and "
            f"{resp.freq_hz[i + 1]:.4g} Hz), beyond what the data resolves (T carries an error of about |T| x 2.2e-16); "
            "start the sweep higher"
        )
    # count on the interpolated curve, _DENSE points per sample interval
    xs, td = resp.dense_t(_DENSE)
    zd = 1.0 + td
    steps = _wrap(np.diff(np.angle(zd)))
    big = np.abs(np.degrees(steps)) > _MAX_STEP_DEG
    if np.any(big):
        i = int(np.argmax(big))
        reasons.append(
            f"the angle of 1 + T jumps by more than {_MAX_STEP_DEG:g} deg between neighbouring points "
            f"near {10.0 ** xs[i]:.4g} Hz: T passes too close to -1 to count safely; sample more densely there"
        )
    rough = sorted({int(i) for i in np.flatnonzero(coarse)} | {int(j) // _DENSE for j in np.flatnonzero(big)})
    coarse_hz = tuple((float(resp.freq_hz[i]), float(resp.freq_hz[i + 1])) for i in rough if i + 1 < resp.freq_hz.size)
    data_turn = 2.0 * float(np.sum(steps))  # the data and its mirror image turn by the same amount

    # top: beyond f_max, 1 + T is assumed close to 1
    top_db = float(resp.gain_db[-1])
    if top_db > TOP_LIMIT_DB:
        if top_db >= 0.0:
            reasons.append(f"the sweep ends at {resp.freq_hz[-1]:.4g} Hz before the loop gain falls below 1 ({top_db:.3g} dB)")
        else:
            reasons.append(
                f"|T| at the top of the sweep ({top_db:.3g} dB at {resp.freq_hz[-1]:.4g} Hz) is not far below 1; "
                f"extend the sweep until it is under {TOP_LIMIT_DB:g} dB"
            )
    top_turn = float(_wrap(np.angle(np.conj(z[-1])) - np.angle(z[-1])))

    # bottom: the detour to the right of s = 0, along T's low-frequency asymptote
    k, slope = origin_poles(resp)
    arc, delta, dc_sign = _bottom_arc(complex(t[0]), k)
    f0 = resp.freq_hz[0]
    bottom_db = float(resp.gain_db[0])
    if abs(slope + 20.0 * k) > SLOPE_TOL_DB_PER_DEC or abs(delta) > PHASE_TOL_DEG:
        dc_sign = "unknown"
        # where |T| is far below 1 and still falls toward DC, the unswept part stays far from -1: no doubt
        if not (bottom_db <= _HARMLESS_BOTTOM_DB and slope > 0.0):
            reasons.append(
                f"T is not settled at the bottom of the sweep ({slope:.3g} dB/decade, phase {math.degrees(np.angle(t[0])):.4g} deg "
                f"at {f0:.4g} Hz); start the sweep lower"
            )
    elif k > 0 and bottom_db < 0.0:
        reasons.append(f"|T| is below 1 at {f0:.4g} Hz but rises toward DC (integrator): a crossover lies below the sweep")
    elif k < 0 and bottom_db > 0.0:
        reasons.append(f"|T| is above 1 at {f0:.4g} Hz but falls toward DC (AC coupling): a crossover lies below the sweep")
    arc_z = 1.0 + arc
    closest = float(np.min(np.abs(arc_z)))
    # how far T below the sweep may stray from the asymptote: a nearby pole or zero leaves a phase
    # residual delta and a slope residual r (dB/decade), and moves |T| by about r / 17 more
    doubt = abs(t[0]) * (abs(math.sin(math.radians(delta))) + abs(slope + 20.0 * k) / 17.0 + _ARC_MODEL_DOUBT)
    if closest < doubt:
        reasons.append(
            f"below the sweep (from {f0:.4g} Hz down) T passes within {closest:.3g} of -1, "
            "closer than its low-frequency asymptote can be trusted; start the sweep lower"
        )
    bottom_turn = float(np.sum(_wrap(np.diff(np.angle(arc_z)))))

    turns = (data_turn + top_turn + bottom_turn) / (2.0 * math.pi)
    n_cw = -int(round(turns))
    if abs(turns + n_cw) > 0.1:
        reasons.append(f"the angle of 1 + T does not close to a whole number of turns ({turns:.3f})")
    z_count = n_cw + int(open_loop_rhp_poles)
    verdict = NyquistVerdict(
        encirclements=n_cw,
        open_loop_rhp_poles=int(open_loop_rhp_poles),
        closed_loop_rhp_poles=z_count,
        stable=z_count == 0,
        reliable=not reasons,
        reasons=tuple(reasons),
        origin_poles=k,
        coarse_hz=coarse_hz,
    )
    return verdict, dc_sign
