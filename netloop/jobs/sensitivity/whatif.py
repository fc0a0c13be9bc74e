"""What value of one knob meets a requirement, everything else held: bracket, solve, and say so plainly when none does.

The requirement's figure is measured over whole sweeps (netloop.jobs.measure.sample_loops, as `check`
measures) with the knob altered on the loaded circuit. From the measured value the knob steps outward
(six steps a decade) toward the requirement's boundary: to meet it when the measured loop does not,
or, when it does, to find how far the value may move before it stops being met. The first step past
the boundary brackets it; Brent's method solves it to 1e-10 in ln x. Every value tried is kept, and
the figure must move one way over them (monotonic) or the answer says it did not.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

from netloop.analysis.preload import load_scipy
from netloop.analysis.requirements import METRICS, Requirement
from netloop.analysis.results import LoopAnalysis
from netloop.errors import SimulationError
from netloop.jobs.sensitivity.knobs import Knob
from netloop.jobs.sensitivity.records import Slope
from netloop.jobs.sensitivity.remeasure import Remeasure
from netloop.sim import Simulator

__all__ = ["Solution", "solve_knob", "figure_of"]

STEPS_PER_DECADE = 6
XTOL_LN = 1e-10


@dataclass(frozen=True, slots=True)
class Solution:
    """The outcome of a solve before the fresh check: the factor found (None: none), and what was seen."""

    factor: float | None
    met_at_value: bool
    monotonic: bool
    tried: tuple[tuple[float, float | None], ...]  # (factor, the requirement's figure)
    reason: str  # why there is no factor, or "" when there is


def figure_of(requirement: Requirement) -> str:
    """The sensitivity figure (pm, gm, fc, peak) that ranks knobs for a requirement; pm for the others."""
    return requirement.metric if requirement.metric in ("pm", "gm", "fc", "peak") else "pm"


def _signed(requirement: Requirement, value: float | None) -> float | None:
    """How far the figure is inside the requirement (> 0 met, < 0 not), in the figure's unit."""
    if value is None or math.isnan(value):
        return None
    if requirement.op in (">=", ">"):
        margin = value - requirement.threshold
        return margin if margin or requirement.op == ">=" else -0.0
    margin = requirement.threshold - value
    return margin if margin or requirement.op == "<=" else -0.0


def _met(g: float | None) -> bool:
    return g is not None and (g > 0 or (g == 0 and math.copysign(1.0, g) > 0))


class _Figure:
    """The requirement's signed margin as a function of ln(factor), each value measured once."""

    def __init__(self, remeasure: Remeasure, simulator: Simulator, knob: Knob, requirement: Requirement):
        self.seen: dict[float, tuple[float | None, float | None]] = {}  # ln factor -> (figure, signed margin)
        self._measure: Callable[[float], LoopAnalysis] = lambda phi: remeasure.whole(
            simulator, (knob.alter(math.exp(phi)),), label=f"{knob.name} x{math.exp(phi):.4g}")[0]
        self.requirement = requirement
        self.failure: str | None = None

    def __call__(self, phi: float) -> float | None:
        if phi not in self.seen:
            try:
                outcome = self.requirement.check(self._measure(phi))
                value = outcome.value
            except SimulationError as exc:
                self.failure = self.failure or f"the simulation failed at {math.exp(phi):.4g}x: {exc.message}"
                value = None
            self.seen[phi] = (value, _signed(self.requirement, value))
        return self.seen[phi][1]

    def tried(self) -> tuple[tuple[float, float | None], ...]:
        return tuple((math.exp(phi), v) for phi, (v, _) in sorted(self.seen.items()))


def _march(g: _Figure, g0: float, direction: int, limit: float) -> tuple[float | None, float | None, bool]:
    """Step from ln factor 0 toward ``direction`` until the sign of g changes or ``limit`` (a ln factor) is passed.

    Returns (phi inside, phi outside) around the first change (None, None when there is none) and
    whether g moved one way on the way."""
    step = math.log(10.0) / STEPS_PER_DECADE
    prev_phi, prev = 0.0, g0
    monotonic, trend = True, 0.0
    k = 1
    while True:
        phi = direction * min(k * step, abs(limit))
        value = g(phi)
        if value is None:
            return None, None, monotonic
        change = value - prev
        if change and trend and (change > 0) != (trend > 0):
            monotonic = False
        trend = change or trend
        if _met(value) != _met(prev):
            return prev_phi, phi, monotonic
        if abs(phi) >= abs(limit):
            return None, None, monotonic
        prev_phi, prev = phi, value
        k += 1


def _solve_between(g: _Figure, inside: float, outside: float) -> float:
    """The ln factor of the boundary between ``inside`` and ``outside`` (Brent's method), moved to the met side."""
    ga, gb = g(inside), g(outside)
    if ga is not None and gb is not None and math.isfinite(ga) and math.isfinite(gb):
        load_scipy()
        from scipy.optimize import brentq  # noqa: PLC0415

        root = brentq(lambda phi: float(g(phi) if g(phi) is not None else math.nan), inside, outside, xtol=XTOL_LN)
    else:  # an end where the figure is infinite (no phase crossover): bisection
        a, b = inside, outside
        while abs(b - a) > XTOL_LN:
            mid = (a + b) / 2.0
            if _met(g(mid)) == _met(ga):
                a = mid
            else:
                b = mid
        root = (a + b) / 2.0
    met_side = inside if _met(ga) else outside
    toward = 1.0 if met_side > root else -1.0
    nudge = XTOL_LN
    phi = root
    while not _met(g(phi)) and nudge < abs(outside - inside):
        phi = root + toward * nudge
        nudge *= 4.0
    return phi if _met(g(phi)) else met_side


def solve_knob(remeasure: Remeasure, simulator: Simulator, knob: Knob, requirement: Requirement, measured: LoopAnalysis,
               slope: Slope, span: tuple[float, float]) -> Solution:
    """The factor of ``knob`` at the boundary of ``requirement`` within ``span`` (low, high factors)."""
    figure = _Figure(remeasure, simulator, knob, requirement)
    value0 = requirement.check(measured).value
    g0 = _signed(requirement, value0)
    name, unit = METRICS[requirement.metric]
    if g0 is None:
        return Solution(None, False, True, (), f"the measured loop has no {name} to move")
    figure.seen[0.0] = (value0, g0)
    met0 = _met(g0)
    rising = slope.per_decade is not None and slope.per_decade > 0
    improving = (1 if rising else -1) * (1 if requirement.op in (">=", ">") else -1)
    first = -improving if met0 else improving
    if slope.per_decade is None or slope.per_decade == 0:
        first = 1
    low, high = math.log(span[0]), math.log(span[1])
    found = (None, None)
    monotonic = True
    for direction in (first, -first):
        inside, outside, mono = _march(figure, g0, direction, high if direction > 0 else low)
        monotonic = monotonic and mono
        if inside is not None:
            found = (inside, outside)
            break
        if met0 or (slope.per_decade not in (None, 0) and mono):
            break  # already met: one way is enough; not met and the figure moved one way: the other way worsens it
    if found[0] is None:
        return Solution(None, met0, monotonic, figure.tried(), _unreachable(figure, requirement, knob, span, met0))
    phi = _solve_between(figure, *found)
    return Solution(math.exp(phi), met0, monotonic, figure.tried(), "")


def _unreachable(figure: _Figure, requirement: Requirement, knob: Knob, span: tuple[float, float], met0: bool) -> str:
    name, unit = METRICS[requirement.metric]
    shown = [(f, v) for f, v in figure.tried() if v is not None]
    where = f"between {span[0]:g}x and {span[1]:g}x of {knob.name}"
    if figure.failure:
        return f"{requirement.text}: no boundary found {where}; {figure.failure}"
    if met0:
        return f"{requirement.text} is met everywhere {where} (the other values held)"
    if not shown:
        return f"{requirement.text} cannot be reached {where}: the {name} does not exist there"
    pick = max if requirement.op in (">=", ">") else min
    best_f, best_v = pick(shown, key=lambda fv: fv[1])
    unit_text = f" {unit}" if unit else ""
    return (f"{requirement.text} cannot be reached by {knob.name} alone {where}: the best is "
            f"{best_v:.4g}{unit_text.replace('db', 'dB').replace('hz', 'Hz')} at {best_f:.3g}x")
