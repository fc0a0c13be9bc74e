"""The records of the sensitivity job: each knob's slopes, each what-if, and the run that holds them."""

from __future__ import annotations

import math
from dataclasses import dataclass

from netloop.analysis.local import LocalReading
from netloop.jobs.loop_result import LoopResult
from netloop.jobs.sensitivity.knobs import Knob

__all__ = ["FIGURES", "SENSITIVITY_CAUTION", "STEPS", "Probe", "Sensitivity", "SensitivityRun", "Slope", "WhatIf", "central_difference"]

STEPS = (1, -1, 2, -2)
"""The changes of each knob, in multiples of the step h of ln x: x e^h, x e^-h, x e^2h, x e^-2h."""

FIGURES = {
    # figure -> (LocalReading field, unit of the figure, unit of its slope)
    "pm": ("phase_margin_deg", "deg", "deg/decade"),
    "gm": ("gain_margin_db", "dB", "dB/decade"),
    "fc": ("unity_gain_hz", "Hz", "Hz/decade"),
    "peak": ("peak_db", "dB", "dB/decade"),
}
"""The figures whose slopes are found: worst phase margin, upper gain margin, unity-gain frequency, closed-loop peaking."""

SENSITIVITY_CAUTION = (
    "Sensitivities are local: each is the slope at the measured values, and a solved value holds for this "
    "operating point and this corner only; re-check the corners (netloop corners) after changing it."
)


@dataclass(frozen=True, slots=True)
class Slope:
    """How much a figure moves per decade of a value (d figure / d log10 x), by central differences.

    per_decade    the central difference with the step h: (F(x e^h) - F(x e^-h)) / (2h), times ln 10.
    error         its estimated error: |D(h) - D(2h)| / 3 (the truncation error of a central
                  difference grows as h^2, so D(2h) - D(h) is three times D(h)'s own error).
    Both are None when the figure does not exist at one of the four values (no crossover).
    """

    per_decade: float | None
    error: float | None

    @property
    def relative_error(self) -> float | None:
        """error / |per_decade| (None when either is None; inf for a zero slope with an error)."""
        if self.per_decade is None or self.error is None:
            return None
        return self.error / abs(self.per_decade) if self.per_decade else (math.inf if self.error else 0.0)


def central_difference(values: dict[int, float | None], step: float) -> Slope:
    """The Slope from a figure at x e^(k h) for k in STEPS (``values[k]``)."""
    if any(values.get(k) is None for k in STEPS):
        return Slope(None, None)
    d1 = (values[1] - values[-1]) / (2.0 * step)
    d2 = (values[2] - values[-2]) / (4.0 * step)
    ln10 = math.log(10.0)
    return Slope(d1 * ln10, abs(d1 - d2) / 3.0 * ln10)


@dataclass(frozen=True, slots=True)
class Probe:
    """One changed value: the knob at ``scale`` times its value, and what the loop did."""

    scale: float
    figures: LocalReading
    whole_sweep: bool


@dataclass(frozen=True, slots=True)
class Sensitivity:
    """One knob's slopes (Slope per figure: pm, gm, fc, peak; see FIGURES), or why it has none.

    value         the knob's value as ngspice loaded it (SI unit of the knob); None if never read.
    probes        the four changed values (x e^h, x e^-h, x e^2h, x e^-2h) and their figures.
    problem       None, or why no slope was found (a simulation failed, the value is 0).
    """

    knob: Knob
    value: float | None
    pm: Slope
    gm: Slope
    fc: Slope
    peak: Slope
    probes: tuple[Probe, ...] = ()
    problem: str | None = None

    def slope(self, figure: str) -> Slope:
        return {"pm": self.pm, "gm": self.gm, "fc": self.fc, "peak": self.peak}[figure]

    @property
    def whole_sweeps(self) -> int:
        """How many of the four changed values needed a whole sweep (the windows could not be trusted)."""
        return sum(1 for p in self.probes if p.whole_sweep)


@dataclass(frozen=True, slots=True)
class WhatIf:
    """The value of one knob that meets one requirement, everything else held.

    requirement      the requirement's text ("pm>=60").
    value            the knob's value as measured (as loaded; None when it could not be read, as in its
                     Sensitivity); solved_value the one found (None: none in range).
    factor           solved_value / value.
    span             the factors searched, (low, high).
    met_at_value     whether the measured loop already meets the requirement (the solve then finds
                     how far the value may move before it stops being met).
    monotonic        whether the requirement's figure moved one way over the values tried on the way.
    tried            (factor, figure) for every value tried (figure None where it did not exist).
    check            the loop measured afresh with the solved value written into the netlist: its
                     margins, peaking and the requirement's outcome. None when nothing was solved.
    edited           the element's card as changed for ``check`` ("Cc cz out {(cc)*1.2}"), or None.
    answer           one plain sentence: the value, or why there is none.
    """

    knob: Knob
    requirement: str
    value: float | None
    solved_value: float | None
    factor: float | None
    span: tuple[float, float]
    met_at_value: bool
    monotonic: bool
    tried: tuple[tuple[float, float | None], ...]
    check: LoopResult | None
    edited: str | None
    answer: str

    @property
    def confirmed(self) -> bool:
        """The fresh measurement at the solved value meets the requirement."""
        return bool(self.check is not None and all(o.passed for o in self.check.requirements))


@dataclass(frozen=True, slots=True)
class SensitivityRun:
    """The measured loop, each knob's slopes ranked by ``rank_by``, and the what-ifs.

    step            h, the change of ln x in each direction (x e^h and x e^2h are simulated).
    withheld        None, or why no sensitivity is given (the measurement's self-checks failed:
                    its verdict is inconclusive, and a slope of an unreliable figure means nothing).
    whole_sweeps    changed values that needed a whole sweep instead of the windows.
    window_count    windows around the crossovers and the peak (plus the bottom of the sweep).
    workers         processes that shared the knobs (1: the measurement's own ngspice).
    """

    nominal: LoopResult
    at: str
    step: float
    rank_by: str
    sensitivities: tuple[Sensitivity, ...]
    what_ifs: tuple[WhatIf, ...]
    withheld: str | None
    window_count: int
    workers: int
    seconds: float
    caution: str = SENSITIVITY_CAUTION

    @property
    def verdict(self) -> str:
        """The measured loop's verdict; "fail" too when a what-if's fresh check does not meet its requirement."""
        if self.nominal.verdict == "inconclusive":
            return "inconclusive"
        if any(w.check is not None and not w.confirmed for w in self.what_ifs):
            return "fail"
        return self.nominal.verdict
