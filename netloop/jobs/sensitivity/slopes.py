"""Each knob's slopes by central differences: four changed values on the loaded circuit, one knob after another."""

from __future__ import annotations

import math
from collections.abc import Sequence

from netloop.errors import SimulationError
from netloop.jobs.sensitivity.knobs import Knob
from netloop.jobs.sensitivity.records import (
    FIGURES,
    STEPS,
    Probe,
    Sensitivity,
    Slope,
    central_difference,
)
from netloop.jobs.sensitivity.remeasure import Remeasure
from netloop.sim import Simulator

__all__ = ["knob_slopes", "slopes_of"]

_NONE = Slope(None, None)


def knob_slopes(remeasure: Remeasure, simulator: Simulator, knob: Knob, step: float) -> Sensitivity:
    """One knob's Sensitivity: the loop read at x e^(k h) for k in STEPS, then central differences."""
    probes: list[Probe] = []
    value: float | None = None
    try:
        for k in STEPS:
            scale = math.exp(k * step)
            reading = remeasure.read(simulator, knob, scale)
            value = reading.loaded.get(knob.alter(scale).ref, value) if knob.in_place else knob.written
            probes.append(Probe(scale, reading.figures, reading.whole_sweep))
    except SimulationError as exc:
        return Sensitivity(knob, value, _NONE, _NONE, _NONE, _NONE, tuple(probes), f"the simulation failed: {exc.message}")
    if value == 0.0:
        return Sensitivity(knob, value, _NONE, _NONE, _NONE, _NONE, tuple(probes), "its value is 0: a relative change is no change")
    slopes = {}
    for figure, (field, _unit, _slope_unit) in FIGURES.items():
        values = {k: getattr(p.figures, field) for k, p in zip(STEPS, probes, strict=True)}
        slopes[figure] = central_difference(values, step)
    return Sensitivity(knob, value, slopes["pm"], slopes["gm"], slopes["fc"], slopes["peak"], tuple(probes))


def slopes_of(remeasure: Remeasure, simulator: Simulator, knobs: Sequence[Knob], step: float) -> tuple[Sensitivity, ...]:
    """Every knob's Sensitivity, in the order given, on one simulator (its loaded circuit serves them all)."""
    return tuple(knob_slopes(remeasure, simulator, knob, step) for knob in knobs)
