"""Second-order equivalents of a phase margin: damping ratio, Q, overshoot (textbook estimates).

For the loop T = wn^2 / (s (s + 2 zeta wn)), whose closed loop is wn^2 / (s^2 + 2 zeta wn s + wn^2):

    PM = atan(2 zeta / sqrt(sqrt(1 + 4 zeta^4) - 2 zeta^2))
       = atan(2 zeta sqrt(sqrt(1 + 4 zeta^4) + 2 zeta^2))      (same, without the cancellation)

Q = 1 / (2 zeta); step overshoot = exp(-pi zeta / sqrt(1 - zeta^2)) for zeta < 1; resonant
peak 1 / (2 zeta sqrt(1 - zeta^2)) for zeta < 1/sqrt(2). These hold exactly only for that loop:
for any other loop they are estimates, and the records say so.
"""

from __future__ import annotations

import math

from netloop.analysis.preload import load_scipy
from netloop.analysis.results import SecondOrderEstimate

__all__ = ["damping_from_phase_margin", "phase_margin_from_damping", "resonant_peak_db", "second_order_estimate"]


SMALL_ANGLE_DEG = 1e-6  # below this phase margin the damping ratio is radians(PM) / 2 to double precision


def phase_margin_from_damping(zeta: float) -> float:
    """Phase margin (deg) of the second-order loop with closed-loop damping ratio zeta > 0."""
    z2 = zeta * zeta
    return math.degrees(math.atan(2.0 * zeta * math.sqrt(math.sqrt(1.0 + 4.0 * z2 * z2) + 2.0 * z2)))


def damping_from_phase_margin(pm_deg: float) -> float:
    """The damping ratio whose second-order loop has this phase margin; pm_deg in (0, 90)."""
    if not 0.0 < pm_deg < 90.0:
        raise ValueError(f"a second-order loop has a phase margin in (0, 90) deg, not {pm_deg}")
    if pm_deg < SMALL_ANGLE_DEG:
        # PM = atan(2 zeta (1 + O(zeta^2))) = 2 zeta (1 + O(zeta^2)): below 1e-6 deg the O(zeta^2) terms are under 1e-16
        # relative, so the inverse is exact in double precision (a root search would need a bracket down to the denormals)
        return math.radians(pm_deg) / 2.0
    load_scipy()  # scipy loads on first use, once (netloop.analysis.preload)
    from scipy.optimize import brentq  # noqa: PLC0415

    return math.exp(brentq(lambda u: phase_margin_from_damping(math.exp(u)) - pm_deg, math.log(1e-12), math.log(1e12), xtol=1e-14))


def resonant_peak_db(zeta: float) -> float | None:
    """The resonant peak of a lone second-order pair, 20 log10(1 / (2 z sqrt(1 - z^2))) for 0 < z < 1/sqrt(2) (Ogata,
    Modern Control Engineering, the resonant peak magnitude); 0 dB for z >= 1/sqrt(2) (no peak); None for z <= 0."""
    if zeta <= 0.0:
        return None
    if zeta >= 1.0 / math.sqrt(2.0):
        return 0.0
    return 20.0 * math.log10(1.0 / (2.0 * zeta * math.sqrt(1.0 - zeta * zeta)))


def second_order_estimate(pm_deg: float | None) -> SecondOrderEstimate | None:
    """Damping, Q, overshoot and resonant peak of the second-order loop with this phase margin; None outside (0, 90)."""
    if pm_deg is None or not 0.0 < pm_deg < 90.0:
        return None
    zeta = damping_from_phase_margin(pm_deg)
    overshoot = 100.0 * math.exp(-math.pi * zeta / math.sqrt(1.0 - zeta * zeta)) if zeta < 1.0 else 0.0
    peak = resonant_peak_db(zeta) if zeta < 1.0 / math.sqrt(2.0) else None
    q = 1.0 / (2.0 * zeta) if zeta > 0.0 else math.inf  # zeta is 0 only when radians(PM) / 2 underflows (PM below 1e-321 deg)
    return SecondOrderEstimate(pm_deg, zeta, q, overshoot, peak)
