"""Closed-loop poles from a rational (AAA) fit of the sensitivity S = 1 / (1 + T).

The closed-loop poles are the zeros of 1 + T, i.e. the poles of S. We fit S, not 1 + T: the
roots of a fitted 1 + T include spurious right-half-plane roots where the fit is loose, while the
poles of S are where the data itself grows. The fit uses the samples at s = j 2 pi f and their
mirror images s = -j 2 pi f (S(-jw) = conj S(jw)), with s scaled by the geometric mean of the
sweep for conditioning, scipy.interpolate.AAA with a tight tolerance, and its clean-up of
Froissart doublets. A first fit is capped at 20 terms; if it has not converged and its error is
still falling, the cap goes to 50; if the error has stopped falling (it has reached the data's
noise), the fit is redone at ten times the smallest error reached (no looser than 1e-5; a
warning says so). Poles whose largest effect on the data is below ten times the tolerance used
are dropped as artefacts of the noise, and so are complex poles without a conjugate partner (S is
real, so its poles are real or conjugate pairs; a lone one is the fit imitating a delay, say). Only poles below the top of the sweep (|p| < 2 pi f_max) are reported: the
data says nothing reliable beyond it.

The same fit gives P, the poles of T itself in the right half plane: S = D / (D + N) vanishes where
T = N / D has a pole, so the fit's zeros in the right half plane within the sweep (and above a tenth
of its bottom, where integrators sit at s = 0) are the opened loop's unstable poles. A zero kept must
have its conjugate (S is real) and no fitted pole beside it (a pole-zero doublet is the fit's, not the
circuit's). netloop.analysis.engine uses their count as P unless the caller gives P.

Limitation: S = den / (den + num) has a zero at every open-loop pole. A closed-loop pole that the
loop barely moves from an open-loop pole (where |T| << 1) sits on that zero, has almost no
effect on the data, and is missed; the count then disagrees with the Nyquist count, which knows
it through P, and a warning says so.
"""

from __future__ import annotations

import math
import warnings
from typing import TYPE_CHECKING

import numpy as np

from netloop.analysis.preload import load_scipy
from netloop.analysis.results import ClosedLoopPoles

if TYPE_CHECKING:
    from scipy.interpolate import AAA

__all__ = ["DEFAULT_RTOL", "DOMINANT_SHARE", "closed_loop_poles", "disagreement", "dominant_pole", "fits_count", "unexplained_share", "unsettled_rhp"]

# A fitted pole shapes 1/(1+T) visibly when its peak weight is at least 1 % of the largest pole's (our choice:
# on the demo circuits a loop's own poles weigh 1 % to 100 %, another loop's seen through coupling about 0.1 %).
DOMINANT_SHARE = 0.01

DEFAULT_RTOL = 1e-10
_MAX_TERMS = 50  # degree 49: ample for loops seen through a probe, and bounds the cost on noisy data
_FIRST_TERMS = 20
_LOOSEST_RTOL = 1e-5


_CLEAN_UP_TOL = 1e-13  # scipy's AAA clean_up default: a pole is a Froissart doublet's when its residue is this small


def _reach(fit: AAA, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(each fitted pole's distance to the nearest point of ``z``, |its residue|): what scipy's test of a Froissart doublet
    and the filter of poles too weak to be the data's both read."""
    poles = fit.poles()  # both kept by the fit, for its caller
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.min(np.abs(poles[:, None] - z[None, :]), axis=1), np.abs(fit.residues())


def _may_hold_doublets(fit: AAA, y: np.ndarray, reach: tuple[np.ndarray, np.ndarray]) -> bool:
    """Whether scipy's clean-up could find a Froissart doublet in ``fit`` of ``y``, whose poles' _reach is ``reach``: its
    own test (a residue below _CLEAN_UP_TOL times the geometric mean of |y| times the pole's distance to the nearest point),
    with ten times the room, so that a sum taken in another order cannot tip a pole across it. False in nearly every fit:
    then the clean-up, which would change nothing, is skipped (about 0.6 ms a fit, most of it in scipy.stats' argument
    handling)."""
    distance, size = reach
    if distance.size == 0:
        return False
    with np.errstate(divide="ignore", invalid="ignore"):
        level = _CLEAN_UP_TOL * float(np.exp(np.mean(np.log(np.abs(y)))))  # scipy.stats.gmean's formula
        return bool(np.any(size / distance < 10.0 * level))


def _fit(z: np.ndarray, y: np.ndarray, rtol: float, max_terms: int) -> tuple[AAA, bool, tuple[np.ndarray, np.ndarray]]:
    """scipy's AAA with its clean-up of Froissart doublets, its warnings (not converged, doublets found) turned into a
    flag, and the _reach of its poles (the doublet test's, kept for the caller when no clean-up changed the fit)."""
    load_scipy()  # scipy loads on first use, once (netloop.analysis.preload)
    from scipy.interpolate import AAA  # noqa: PLC0415

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fit = AAA(z, y, rtol=rtol, max_terms=min(max_terms, z.size // 2), clean_up=False)
        reach = _reach(fit, z)
        if _may_hold_doublets(fit, y, reach):
            fit.clean_up(_CLEAN_UP_TOL)
            reach = _reach(fit, z)
    return fit, not caught, reach


def _fit_at(fit: AAA, z: np.ndarray) -> np.ndarray:
    """fit(z) bit for bit, for points ``z`` none of which is infinite: scipy's barycentric sum by the same expressions, its
    0/0 at a support point replaced by the support value as scipy does, but for all such points at once where scipy loops
    over them in Python (about 30 us instead of 90 on a sky130 fit of 278 points and 9 terms, timeit)."""
    points, values = fit.support_points, fit.support_values
    weights = fit.weights[:, np.newaxis]
    with np.errstate(invalid="ignore", divide="ignore"):
        cauchy = 1 / (z[:, np.newaxis] - points[np.newaxis, :])
        r = (cauchy @ (weights * values[:, np.newaxis]) / (cauchy @ weights))[:, 0]
    nan = np.flatnonzero(np.isnan(r))  # the support points among z, and any other 0/0, which stays NaN as in scipy
    at = z[nan, np.newaxis] == points[np.newaxis, :]
    hit = np.any(at, axis=1)
    r[nan[hit]] = values[np.argmax(at[hit], axis=1)]
    return r


# A complex pole and its partner's conjugate agree to this (relative), or to ten times the fit's
# tolerance when the data needed a looser fit. Measured: on the clean loops of
# tests/analysis/test_nyquist_property.py true pairs agree to 1e-11 or better; the lone poles of a
# fit of noisy 100k-element ngspice data missed any partner by 15 % or more; on data with 1e-3
# noise the one real pole came out with an imaginary part of up to 9e-4 of its size.
_PAIR_RTOL = 1e-3


def _conjugate_pairs(poles: np.ndarray, rtol: float = _PAIR_RTOL) -> tuple[np.ndarray, int]:
    """The poles that are real or have their complex conjugate among the poles (to ``rtol``), and how many do not; the
    real ones on the real axis.

    S(s) is real (its samples at -jw are the conjugates of those at jw), so its poles are real or come
    in conjugate pairs; a fitted complex pole whose conjugate is missing is an artefact of the fit. A pole within
    ``rtol`` of its own conjugate is real: the fit leaves it a small imaginary part of either sign (about 3e-4 of its
    size on a sky130 folded-cascode buffer), which would make it one member of a pair of damping 0.9999999 and, when
    negative, the lower member that dominant_pole passes over.
    """
    size = np.abs(poles)
    gap = np.abs(poles[np.newaxis, :] - np.conj(poles)[:, np.newaxis])  # row i: each pole's distance to conj(pole i)
    np.fill_diagonal(gap, np.inf)  # a pole is not its own partner (a real one needs none: next line)
    real = 2.0 * np.abs(poles.imag) <= rtol * size
    keep = real | (np.min(gap, axis=1, initial=np.inf) <= rtol * size)
    snapped = np.where(real, poles.real + 0j, poles)
    return snapped[keep], int(np.sum(~keep))


def closed_loop_poles(freq_hz: np.ndarray, t: np.ndarray, nyquist_rhp: int, rtol: float = DEFAULT_RTOL) -> tuple[ClosedLoopPoles | None, tuple[str, ...]]:
    """Fit S = 1/(1+T) and return (poles record or None, warnings)."""
    notes: list[str] = []
    f_ref = math.sqrt(float(freq_hz[0]) * float(freq_hz[-1]))
    s = 1j * freq_hz / f_ref
    sens = np.divide(1.0, 1.0 + t, out=np.full(t.shape, np.inf, dtype=complex), where=(1.0 + t) != 0.0)
    if np.any(1.0 + t == 0.0):
        return None, ("T equals -1 at a sample: the closed loop has a pole on the imaginary axis; no pole fit",)
    z = np.concatenate([np.conj(s[::-1]), s])
    y = np.concatenate([np.conj(sens[::-1]), sens])
    scale = float(np.max(np.abs(y)))
    try:
        used = rtol
        fit, ok, reach = _fit(z, y, used, _FIRST_TERMS)
        if not ok:
            errs = np.asarray(fit.errors) / scale
            if errs.size > 5 and errs[-1] < 1e-2 * errs[-6]:  # still falling: a loop of higher degree
                fit, ok, reach = _fit(z, y, used, _MAX_TERMS)
                errs = np.asarray(fit.errors) / scale
            if not ok:  # the error has hit the data's noise: fit to ten times that level
                used = max(rtol, 10.0 * float(np.min(errs)))
                if used <= _LOOSEST_RTOL:
                    fit, ok, reach = _fit(z, y, used, _MAX_TERMS)
    except (ValueError, np.linalg.LinAlgError, FloatingPointError) as exc:
        return None, (f"the rational fit of 1/(1+T) failed ({exc}); no closed-loop poles",)
    if not ok:
        notes.append(f"the rational fit of 1/(1+T) did not converge (relative error {float(np.min(errs)):.2g}); the pole list may be wrong")
    if used > rtol:
        notes.append(f"the rational fit of 1/(1+T) needed a relative tolerance of {used:.0e} (noisy data?)")
    fit_error = float(np.max(np.abs(_fit_at(fit, z) - y)) / scale)
    poles_scaled = fit.poles()
    # a pole whose largest effect on the data is below the fit's tolerance is a fit artefact
    dist, size = reach
    with np.errstate(divide="ignore", invalid="ignore"):
        effect = size / dist / scale
    poles_scaled = poles_scaled[~(effect < 10.0 * used)]
    poles = np.asarray(poles_scaled, dtype=complex) * (2.0 * math.pi * f_ref)
    poles = poles[np.isfinite(poles)]
    w_max = 2.0 * math.pi * float(freq_hz[-1])
    poles = poles[np.abs(poles) < w_max]
    poles, unpaired = _conjugate_pairs(poles, max(_PAIR_RTOL, 10.0 * used))
    if unpaired:
        notes.append(
            f"{unpaired} fitted pole(s) without a complex-conjugate partner set aside: a circuit's poles come in conjugate "
            "pairs, and such poles are how the fit imitates what no low-order rational function follows (the delay of a "
            "distributed RC network, noise)"
        )
    poles = poles[np.argsort(np.abs(poles), kind="stable")]
    rhp = int(np.sum(poles.real > 1e-9 * np.maximum(np.abs(poles), 1e-300)))
    open_rhp = _open_loop_rhp_poles(fit, f_ref, float(freq_hz[0]), float(freq_hz[-1]), max(_PAIR_RTOL, 10.0 * used))
    damping = q = freq = None
    p = dominant_pole(freq_hz, t, poles)
    if p is not None and p.imag > 1e-9 * abs(p):  # the dominant pole is one of a complex pair
        damping = float(-p.real / abs(p))
        q = 1.0 / (2.0 * damping) if damping > 0 else math.inf
        freq = float(abs(p) / (2.0 * math.pi))
    agrees = fits_count(poles, nyquist_rhp)
    if not agrees:
        notes.append(disagreement(rhp, nyquist_rhp, float(freq_hz[-1])))
    return ClosedLoopPoles(tuple(complex(p) for p in poles), rhp, damping, q, freq, agrees, fit_error,
                           tuple(complex(p) for p in open_rhp)), tuple(notes)


def fits_count(poles, count: int) -> bool:
    """Whether the fitted closed-loop poles (rad/s) allow ``count`` of them in the right half plane: at least the poles
    clearly there, at most those and the ones within _PAIR_RTOL of the imaginary axis, whose side the fit does not settle
    (as a pole that near the real axis is taken as real). Such a pole's resonance is narrower than 2e-3 of its frequency,
    far finer than the samples: on the unstable common-mode loop of circuits/testbench/fd_cmfb_hier.cir the same data,
    changed by 2e-8 (the pair's two nets taken in the other order), gave a fit with a doublet at 3.97 MHz of damping -4e-4
    or none, 4 right-half-plane poles or the 2 the Nyquist count has."""
    p, near = _near_axis(poles)
    clear = int(np.sum((p.real > 0) & ~near))
    return clear <= count <= clear + int(np.sum(near))


def unsettled_rhp(poles) -> int:
    """How many of the fitted poles counted in the right half plane lie within _PAIR_RTOL of the imaginary axis, where
    the fit does not settle their side (fits_count)."""
    p, near = _near_axis(poles)
    return int(np.sum(near & (p.real > 1e-9 * np.abs(p))))


def _near_axis(poles) -> tuple[np.ndarray, np.ndarray]:
    """(the poles as complex numbers, which of them are complex and within _PAIR_RTOL of the imaginary axis)."""
    p = np.asarray(poles, dtype=complex)
    return p, (np.abs(p.real) <= _PAIR_RTOL * np.abs(p)) & (p.imag != 0)


def _residue_fit(freq_hz, t, poles: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """The linear least-squares fit of S = 1/(1+T) = c + sum r_k / (s - p_k) over the data at ``poles`` (rad/s): (its
    coefficients c, r_k; the basis [1, 1/(s - p_k)] at the samples where it and S are finite; S there), or None when
    there are no more such samples than poles."""
    f = np.asarray(freq_hz, dtype=float)
    s = 2j * math.pi * f
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        sens = 1.0 / (1.0 + np.asarray(t, dtype=complex))
        basis = np.empty((s.size, poles.size + 1), dtype=complex)
        basis[:, 0] = 1.0
        basis[:, 1:] = 1.0 / (s[:, np.newaxis] - poles[np.newaxis, :])
    good = np.all(np.isfinite(basis), axis=1) & np.isfinite(sens)
    if np.count_nonzero(good) <= poles.size:
        return None
    return np.linalg.lstsq(basis[good], sens[good], rcond=None)[0], basis[good], sens[good]


def dominant_pole(freq_hz, t, poles) -> complex | None:
    """The dominant closed-loop pole (rad/s), the one definition every report uses: the least-damped pole among those
    that visibly shape 1/(1+T), the upper member of a pair; None without poles.

    Each pole's weight is the peak its term reaches on the jw axis, |r| / |Re p|, with the residues r from a linear
    least-squares fit of S = 1/(1+T) = c + sum r_k / (s - p_k) over the data at these poles. Poles below
    ``DOMINANT_SHARE`` of the largest weight only show faintly (another loop's, seen through weak coupling) and are
    passed over; among the rest the one with the smallest damping -Re p / |p| is taken (ties: the slower one).
    """
    p = np.asarray(poles, dtype=complex)
    if p.size == 0:
        return None
    fitted = _residue_fit(freq_hz, t, p)
    if fitted is None:
        return None
    coef = fitted[0]
    weight = np.abs(coef[1:]) / np.maximum(np.abs(p.real), 1e-12 * np.abs(p))
    keep = (p.imag >= -1e-9 * np.abs(p)) & (weight >= DOMINANT_SHARE * np.max(weight))
    if not np.any(keep):
        return None
    return complex(min(p[keep], key=lambda q: (-q.real / abs(q), -q.real)))


def unexplained_share(freq_hz, t, poles) -> float:
    """How much of the measured S = 1/(1+T) no sum c + sum r_k / (s - p_k) over ``poles`` (rad/s; the finite ones, each
    once) explains: the largest misfit of the least-squares fit against the largest |S|; 1.0 when too few samples are
    finite. Near 0 (1e-14 on a two-pole loop's own roots) when the poles are the closed loop's; of order 1 when they are
    not (0.35 for the same roots mirrored into the other half plane, whose terms differ by an all-pass factor on the jw
    axis)."""
    p = np.unique(np.asarray(poles, dtype=complex))
    fitted = _residue_fit(freq_hz, t, p[np.isfinite(p)])
    if fitted is None:
        return 1.0
    coef, basis, sens = fitted
    return float(np.max(np.abs(basis @ coef - sens)) / np.max(np.abs(sens)))


def disagreement(fit_rhp: int, nyquist_rhp: int, f_max_hz: float) -> str:
    """The warning when the pole fit's right-half-plane count differs from the Nyquist count."""
    return f"the closed-loop pole fit finds {fit_rhp} right-half-plane pole(s) below {f_max_hz:.4g} Hz but the Nyquist count says {nyquist_rhp}"


_RHP_REAL = 1e-6  # a zero counts as right-half-plane when its real part exceeds this fraction of its size
_DOUBLET = 1e-3  # a zero this close (relative) to a fitted pole is a pole-zero doublet of the fit


def _open_loop_rhp_poles(fit: AAA, f_ref: float, f_min_hz: float, f_max_hz: float, pair_rtol: float) -> np.ndarray:
    """The right-half-plane zeros of the fitted S within the sweep (rad/s, sorted by size): the poles of T there."""
    zeros = np.asarray(fit.roots(), dtype=complex)
    poles = np.asarray(fit.poles(), dtype=complex)
    zeros = zeros[np.isfinite(zeros)]
    size = np.abs(zeros)
    inside = (size < f_max_hz / f_ref) & (size > 0.1 * f_min_hz / f_ref) & (zeros.real > _RHP_REAL * size)
    zeros = zeros[inside]
    if poles.size and zeros.size:
        apart = np.min(np.abs(zeros[:, None] - poles[None, :]), axis=1) > _DOUBLET * np.abs(zeros)
        zeros = zeros[apart]
    zeros, _ = _conjugate_pairs(zeros, pair_rtol)
    zeros = zeros * (2.0 * math.pi * f_ref)
    return zeros[np.argsort(np.abs(zeros), kind="stable")]
