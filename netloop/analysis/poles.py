"""Closed-loop poles from a rational (AAA) fit of the sensitivity S = 1 / (1 + T).

The closed-loop poles are the zeros of 1 + T, i.e. the poles of S. We fit S, not 1 + T: the
roots of a fitted 1 + T include spurious right-half-plane roots where the fit is loose, while the
poles of S are where the data itself grows. The fit uses the samples at s = j 2 pi f and their
mirror images s = -j 2 pi f (S(-jw) = conj S(jw)), with s scaled by the geometric mean of the
sweep for conditioning, scipy.interpolate.AAA with a tight tolerance, and its clean-up of
Froissart doublets. When the data is too noisy for the tolerance to be met, the tolerance is
loosened a hundredfold at a time (to 1e-5 at most, with a warning), and poles whose largest effect
on the data is below ten times the tolerance used are dropped as artefacts of the noise. Only poles below the top of the sweep (|p| < 2 pi f_max) are reported: the
data says nothing reliable beyond it.

Limitation: S = den / (den + num) has a zero at every open-loop pole. A closed-loop pole that the
loop barely moves from an open-loop pole (where |T| << 1) sits on that zero, has almost no
effect on the data, and is missed; the count then disagrees with the Nyquist count, which knows
it through P, and a warning says so.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
from scipy.interpolate import AAA

from netloop.analysis.results import ClosedLoopPoles

__all__ = ["DEFAULT_RTOL", "closed_loop_poles"]

DEFAULT_RTOL = 1e-10
_MAX_TERMS = 100
_LOOSEST_RTOL = 1e-5


def _ladder(rtol: float) -> list[float]:
    """Tolerances to try: rtol, then 100 times looser each step, up to _LOOSEST_RTOL."""
    out = [rtol]
    while out[-1] * 100.0 <= _LOOSEST_RTOL:
        out.append(out[-1] * 100.0)
    return out


def closed_loop_poles(freq_hz: np.ndarray, t: np.ndarray, nyquist_rhp: int, rtol: float = DEFAULT_RTOL) -> tuple[ClosedLoopPoles | None, tuple[str, ...]]:
    """Fit S = 1/(1+T) and return (poles record or None, warnings)."""
    notes: list[str] = []
    f_ref = math.sqrt(float(freq_hz[0]) * float(freq_hz[-1]))
    s = 1j * freq_hz / f_ref
    sens = 1.0 / (1.0 + t)
    if not np.all(np.isfinite(sens)):
        return None, ("T equals -1 at a sample: the closed loop has a pole on the imaginary axis; no pole fit",)
    z = np.concatenate([np.conj(s[::-1]), s])
    y = np.concatenate([np.conj(sens[::-1]), sens])
    scale = float(np.max(np.abs(y)))
    fit = None
    for tol in _ladder(rtol):
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                candidate = AAA(z, y, rtol=tol, max_terms=min(_MAX_TERMS, z.size // 2))
            except (ValueError, np.linalg.LinAlgError, FloatingPointError) as exc:
                return None, (f"the rational fit of 1/(1+T) failed ({exc}); no closed-loop poles",)
        fit, used = candidate, tol
        if not caught and float(np.max(np.abs(fit(z) - y))) <= 10.0 * tol * scale:
            break
    else:
        notes.append(f"the rational fit of 1/(1+T) did not converge even at a relative tolerance of {used:.0e}; the pole list may be wrong")
    if used > rtol:
        notes.append(f"the rational fit of 1/(1+T) needed a relative tolerance of {used:.0e} (noisy data?)")
    fit_error = float(np.max(np.abs(fit(z) - y)) / scale)
    poles_scaled = fit.poles()
    residues = fit.residues()
    # a pole whose largest effect on the data is below the fit's tolerance is a fit artefact
    dist = np.min(np.abs(poles_scaled[:, None] - z[None, :]), axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        effect = np.abs(residues) / dist / scale
    poles_scaled = poles_scaled[~(effect < 10.0 * used)]
    poles = np.asarray(poles_scaled, dtype=complex) * (2.0 * math.pi * f_ref)
    poles = poles[np.isfinite(poles)]
    w_max = 2.0 * math.pi * float(freq_hz[-1])
    poles = poles[np.abs(poles) < w_max]
    poles = poles[np.argsort(np.abs(poles), kind="stable")]
    rhp = int(np.sum(poles.real > 1e-9 * np.maximum(np.abs(poles), 1e-300)))
    complex_upper = [p for p in poles if p.imag > 1e-9 * abs(p)]
    damping = q = freq = None
    if complex_upper:
        p = min(complex_upper, key=lambda p: -p.real / abs(p))
        damping = float(-p.real / abs(p))
        q = 1.0 / (2.0 * damping) if damping > 0 else math.inf
        freq = float(abs(p) / (2.0 * math.pi))
    agrees = rhp == nyquist_rhp
    if not agrees:
        notes.append(
            f"the closed-loop pole fit finds {rhp} right-half-plane pole(s) below {freq_hz[-1]:.4g} Hz "
            f"but the Nyquist count says {nyquist_rhp}"
        )
    return ClosedLoopPoles(tuple(complex(p) for p in poles), rhp, damping, q, freq, agrees, fit_error), tuple(notes)
