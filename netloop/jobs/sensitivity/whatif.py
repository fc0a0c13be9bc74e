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
from dataclasses import dataclass

from netloop.analysis.preload import load_scipy
from netloop.analysis.requirements import METRICS, Requirement
from netloop.analysis.results import LoopAnalysis
from netloop.errors import SimulationError
from netloop.jobs.sensitivity.knobs import Knob
from netloop.jobs.sensitivity.records import Slope
from netloop.jobs.sensitivity.remeasure import Remeasure
from netloop.sim import Simulator

__all__ = ["Solution", "figure_of", "solve_knob"]

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


def _margin(requirement: Requirement, value: float | None) -> float | None:
    """How far the figure is inside the requirement (> 0 inside, < 0 outside), in the figure's unit."""
    if value is None or math.isnan(value):
        return None
    return value - requirement.threshold if requirement.op in (">=", ">") else requirement.threshold - value


class _Figure:
    """The requirement at a factor of the knob's value (a function of ln factor), each factor measured once."""

    def __init__(self, remeasure: Remeasure, simulator: Simulator, knob: Knob, requirement: Requirement, measured: LoopAnalysis):
        self.remeasure, self.simulator, self.knob, self.requirement = remeasure, simulator, knob, requirement
        self.seen: dict[float, tuple[float | None, float | None, bool]] = {}  # ln factor -> (figure, margin, met)
        self.failure: str | None = None
        self._record(0.0, measured)

    def _record(self, phi: float, analysis: LoopAnalysis | None) -> None:
        outcome = self.requirement.check(analysis) if analysis is not None else None
        value = outcome.value if outcome is not None else None
        self.seen[phi] = (value, _margin(self.requirement, value), bool(outcome is not None and outcome.passed))

    def _look(self, phi: float) -> tuple[float | None, float | None, bool]:
        if phi not in self.seen:
            factor = math.exp(phi)
            try:
                analysis = self.remeasure.whole(self.simulator, self.knob, factor, label=f"{self.knob.name} x{factor:.4g}")[0]
            except SimulationError as exc:
                self.failure = self.failure or f"the simulation failed at {factor:.4g}x: {exc.message}"
                analysis = None
            self._record(phi, analysis)
        return self.seen[phi]

    def margin(self, phi: float) -> float | None:
        return self._look(phi)[1]

    def met(self, phi: float) -> bool:
        return self._look(phi)[2]

    def tried(self) -> tuple[tuple[float, float | None], ...]:
        return tuple((math.exp(phi), v) for phi, (v, _, _) in sorted(self.seen.items()))


def _march(figure: _Figure, direction: int, limit: float) -> tuple[float | None, float | None, bool]:
    """Step from ln factor 0 toward ``direction`` until the requirement's outcome changes or ``limit`` (a ln factor) is passed.

    Returns (phi before, phi after) the first change (None, None when there is none) and whether the
    figure moved one way on the way."""
    step = math.log(10.0) / STEPS_PER_DECADE
    prev_phi = 0.0
    monotonic, trend = True, 0.0
    k = 1
    while True:
        phi = direction * min(k * step, abs(limit))
        value, before = figure.margin(phi), figure.margin(prev_phi)
        if value is None:
            return None, None, monotonic
        change = value - before
        if change and trend and (change > 0) != (trend > 0):
            monotonic = False
        trend = change or trend
        if figure.met(phi) != figure.met(prev_phi):
            return prev_phi, phi, monotonic
        if abs(phi) >= abs(limit):
            return None, None, monotonic
        prev_phi = phi
        k += 1


def _solve_between(figure: _Figure, before: float, after: float) -> float:
    """The ln factor of the boundary between ``before`` and ``after`` (Brent's method), taken on the side that meets."""
    ga, gb = figure.margin(before), figure.margin(after)
    if ga is not None and gb is not None and math.isfinite(ga) and math.isfinite(gb):
        load_scipy()
        from scipy.optimize import brentq  # noqa: PLC0415

        root = brentq(lambda phi: figure.margin(phi) if figure.margin(phi) is not None else math.nan, before, after, xtol=XTOL_LN)
    else:  # an end where the figure is infinite (no phase crossover there): bisection on the outcome
        a, b = before, after
        while abs(b - a) > XTOL_LN:
            mid = (a + b) / 2.0
            a, b = (mid, b) if figure.met(mid) == figure.met(before) else (a, mid)
        root = (a + b) / 2.0
    met_side = before if figure.met(before) else after
    toward = 1.0 if met_side > root else -1.0
    phi, nudge = root, XTOL_LN
    while not figure.met(phi) and nudge < abs(after - before):  # the root itself may lie a rounding outside
        phi = root + toward * nudge
        nudge *= 4.0
    return phi if figure.met(phi) else met_side


def solve_knob(remeasure: Remeasure, simulator: Simulator, knob: Knob, requirement: Requirement, measured: LoopAnalysis,
               slope: Slope, span: tuple[float, float]) -> Solution:
    """The factor of ``knob`` at the boundary of ``requirement`` within ``span`` (low, high factors)."""
    figure = _Figure(remeasure, simulator, knob, requirement, measured)
    if figure.margin(0.0) is None:
        return Solution(None, False, True, (), f"the measured loop has no {METRICS[requirement.metric][0]} to move")
    met0 = figure.met(0.0)
    known = slope.per_decade is not None and slope.per_decade != 0
    rising = known and slope.per_decade > 0
    improving = (1 if rising else -1) * (1 if requirement.op in (">=", ">") else -1)
    first = (-improving if met0 else improving) if known else 1
    low, high = math.log(span[0]), math.log(span[1])
    found: tuple[float | None, float | None] = (None, None)
    monotonic = True
    for direction in (first, -first):
        before, after, mono = _march(figure, direction, high if direction > 0 else low)
        monotonic = monotonic and mono
        if before is not None:
            found = (before, after)
            break
        if met0 or (known and mono):
            break  # met: one way is enough; not met, and the figure moved one way: the other way only worsens it
    if found[0] is None:
        return Solution(None, met0, monotonic, figure.tried(), _unreachable(figure, requirement, knob, span, met0))
    phi = _solve_between(figure, *found)
    return Solution(math.exp(phi), met0, monotonic, figure.tried(), "")


def _unreachable(figure: _Figure, requirement: Requirement, knob: Knob, span: tuple[float, float], met0: bool) -> str:
    name, unit = METRICS[requirement.metric]
    shown = [(f, v) for f, v in figure.tried() if v is not None]
    between = f"between {span[0]:g}x and {span[1]:g}x"
    if figure.failure:
        return f"{requirement.text}: no boundary found for {knob.name} {between}; {figure.failure}"
    if met0:
        return f"{requirement.text} is met for every value of {knob.name} {between} (the other values held)"
    if not shown:
        return f"{requirement.text} cannot be reached by {knob.name} alone {between}: the {name} does not exist there"
    pick = max if requirement.op in (">=", ">") else min
    best_f, best_v = pick(shown, key=lambda fv: fv[1])
    shown_unit = {"deg": " deg", "db": " dB", "hz": " Hz", "s": " s"}.get(unit, "")
    return f"{requirement.text} cannot be reached by {knob.name} alone {between}: the best is {best_v:.4g}{shown_unit} at {best_f:.3g}x"
