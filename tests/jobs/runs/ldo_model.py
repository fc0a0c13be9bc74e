"""The behavioural LDO of circuits/regulator/ldo_rev_a.cir in closed form, and corner records measured on it without ngspice.

The model is the LDO small-signal model of the regulator literature: an output pole set by the load (the pass
device's output resistance and the load), a zero from the output capacitor's ESR, and a pole at the pass
device's gate from the error amplifier (G. A. Rincon-Mora and P. E. Allen, "A Low-Voltage, Low Quiescent
Current, Low Drop-Out Regulator", IEEE J. Solid-State Circuits 33(1), 1998; G. A. Rincon-Mora, "Analog IC
Design with Low-Dropout Regulators", McGraw-Hill, 2009 -- both cited from memory). The expression below is
derived here by nodal analysis of the netlist, broken at fb (Gea senses fb with no input current):

    T(s) = R2/(R1+R2) * aea/(1 + s/wa) * gmp * Z(s),  1/Z = 1/rop + 1/(R1+R2) + s Cdec + 1/(esr + 1/(s Cout))

with gmp = sqrt(2 kp iload), rop = 1/(lambda iload), wa = 2 pi fa. Without Cdec (Cdec -> 0):

    T(s) = K (1 + s/wz) / ((1 + s/wa)(1 + s/wp)),   K = beta aea gmp Rout,  Rout = rop || (R1+R2),
    wz = 1/(esr Cout),  wp = 1/((Rout + esr) Cout)

and |T(jw)| = 1 is a quadratic in x = w^2,

    x^2/(wa^2 wp^2) + x (1/wa^2 + 1/wp^2 - K^2/wz^2) + 1 - K^2 = 0,

whose one positive root (K > 1 makes the constant negative) gives the crossover wc; then

    PM = 180 deg - atan(wc/wa) - atan(wc/wp) + atan(wc/wz).

So the phase margin is a closed-form function of load current and ESR (phase_margin_deg). python-control's
stability_margins on the same T(s) is the second reference (tests/jobs/runs/test_boundary.py checks it).
With Cdec the crossover solves a cubic; ``t_of`` evaluates T exactly for any Cdec and an extra pole at fb.
"""

from __future__ import annotations

import math

import numpy as np

from netloop.analysis import analyse, parse_requirements
from netloop.jobs.document import to_document
from netloop.jobs.loop_result import BreakInfo, LoopResult, SimInfo

W = 2 * math.pi
# the values of circuits/regulator/ldo_rev_a.cir (INVENTED)
KP, LAMBDA, AEA, FA, R1, R2, COUT, CDEC = 2.0, 0.05, 100.0, 400e3, 50e3, 100e3, 1e-6, 10e-9
BETA = R2 / (R1 + R2)


def parts(iload: float, esr: float) -> tuple[float, float, float, float]:
    """(K, wz, wp, wa) of the Cdec-free model."""
    gmp = math.sqrt(2 * KP * iload)
    rout = 1 / (LAMBDA * iload + 1 / (R1 + R2))
    return BETA * AEA * gmp * rout, 1 / (esr * COUT), 1 / ((rout + esr) * COUT), W * FA


def crossover_rad_s(iload: float, esr: float) -> float:
    """The crossover of the Cdec-free model: the positive root of the quadratic in w^2."""
    k, wz, wp, wa = parts(iload, esr)
    a, b, c = 1 / (wa**2 * wp**2), 1 / wa**2 + 1 / wp**2 - k**2 / wz**2, 1 - k**2
    return math.sqrt((-b + math.sqrt(b * b - 4 * a * c)) / (2 * a))


def phase_margin_deg(iload: float, esr: float) -> float:
    """The closed-form phase margin of the Cdec-free model (module docstring)."""
    _, wz, wp, wa = parts(iload, esr)
    wc = crossover_rad_s(iload, esr)
    return 180.0 - math.degrees(math.atan(wc / wa) + math.atan(wc / wp) - math.atan(wc / wz))


def t_of(f, iload: float, esr: float, *, cdec: float = 0.0, fb_pole_hz: float | None = None) -> np.ndarray:
    """T(j 2 pi f) of the netlist exactly (module docstring), with decoupling ``cdec`` and an optional pole at fb
    (revision B's 24 fF with R1 || R2)."""
    s = 1j * W * np.asarray(f, dtype=float)
    gmp = math.sqrt(2 * KP * iload)
    y = LAMBDA * iload + 1 / (R1 + R2) + s * cdec + 1 / (esr + 1 / (s * COUT))
    t = BETA * AEA / (1 + s / (W * FA)) * gmp / y
    return t if fb_pole_hz is None else t / (1 + s / (W * fb_pole_hz))


def grid(low: float, high: float, steps=(1, 1.5, 2, 3, 5, 7)) -> list[float]:
    """Values ``steps`` x 10^k from low to high (6 a decade by default)."""
    out = []
    for k in range(math.floor(math.log10(low)) - 1, math.ceil(math.log10(high)) + 1):
        for step in steps:
            v = float(f"{step}e{k}")
            if low * (1 - 1e-9) <= v <= high * (1 + 1e-9):
                out.append(v)
    return out


FREQ_HZ = np.logspace(0, 9, 721)


def record(settings: dict[str, str], t, *, requirements=("pm >= 45",), corner: str = "", at: str = "fb") -> dict:
    """A corner record as the corners job stores it, for a loop whose T(f) is given: netloop's own analysis of the
    sampled T, wrapped in a LoopResult and its document."""
    analysis = analyse(FREQ_HZ, t(FREQ_HZ), fit_poles=False)
    reqs = tuple(r.check(analysis) for r in parse_requirements(requirements))
    name = corner or "/".join(f"{k.split('.')[-1]}={v}" for k, v in settings.items())
    result = LoopResult(netlist="ldo_rev_a.cir", label=name, method="tian",
                        breaks=BreakInfo(at, f"{at}_drive", at, ("r1.n",), ("gea.cp",), ("r2.p",), "by hand", ()),
                        analysis=analysis, requirements=reqs, ignored_statements=(), warnings=(),
                        sim=SimInfo("analytic", FREQ_HZ.size, 0, True, None, None, 0.0))
    return {"record": "corner", "key": name, "corner": name, "at": at, "netlist": "ldo_rev_a.cir", "settings": dict(settings),
            "outcome": result.verdict, "error": None, "simulator_output": None, "seconds": 0.0, "sim_seconds": 0.0,
            "worker": None, "loop": to_document(result)}


def spice(value: float) -> str:
    """A value as a plan writes it ("1m", "0.05")."""
    for scale, suffix in ((1e-3, "m"), (1e-6, "u")):
        if value < 1 and abs(value / scale - round(value / scale, 6)) < 1e-12 and value / scale >= 1:
            return f"{round(value / scale, 6):g}{suffix}"
    return f"{value:g}"
