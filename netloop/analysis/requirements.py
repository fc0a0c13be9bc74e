"""Pass/fail requirements on a loop analysis, written as text such as "pm>=60" or "fc > 1meg".

Grammar: METRIC OP NUMBER[SUFFIX][UNIT], spaces allowed between the parts, case-insensitive.

    metric  meaning (unit)                              taken from
    pm      worst phase margin (deg)                    margins.phase_margin_deg
    gm      upper gain margin (dB)                      margins.gain_margin_db
    lgm     lower gain margin (dB, positive)            margins.lower_gain_margin_db
    fc      unity-gain (crossover) frequency (Hz)       margins.unity_gain_hz
    mm      modulus margin, min |1 + T| (linear)        margins.modulus_margin
    dm      delay margin (s)                            margins.delay_margin_s
    dc      DC loop gain (dB)                           dc_gain_db
    peak    closed-loop peaking (dB)                    peaking.peak_db

    OP      >=  <=  >  <
    SUFFIX  SI/SPICE multipliers: t g meg k m u n p f (so 1meg = 1e6, 1m = 1e-3)
    UNIT    optional, and only the metric's own: deg, db, hz, s

A metric that does not exist for the loop FAILS, with a reason, except in one documented case:
gm (or lgm) of a loop that the Nyquist count reliably calls stable and that has no phase
crossover of that kind in the sweep; the gain may then rise (or fall) without limit as far as the
data shows, so the value is +inf: ">=" and ">" pass, "<=" and "<" fail.
"""

from __future__ import annotations

import math
import operator
import re
from collections.abc import Callable, Iterable
from dataclasses import dataclass

from netloop.analysis.results import LoopAnalysis
from netloop.errors import PlanError

__all__ = ["METRICS", "Requirement", "RequirementOutcome", "parse_requirement", "parse_requirements"]

METRICS: dict[str, tuple[str, str]] = {
    "pm": ("worst phase margin", "deg"),
    "gm": ("upper gain margin", "db"),
    "lgm": ("lower gain margin", "db"),
    "fc": ("unity-gain frequency", "hz"),
    "mm": ("modulus margin", ""),
    "dm": ("delay margin", "s"),
    "dc": ("DC loop gain", "db"),
    "peak": ("closed-loop peaking", "db"),
}

_OPS: dict[str, Callable[[float, float], bool]] = {">=": operator.ge, "<=": operator.le, ">": operator.gt, "<": operator.lt}
_SUFFIX = {"t": 1e12, "g": 1e9, "meg": 1e6, "k": 1e3, "": 1.0, "m": 1e-3, "u": 1e-6, "n": 1e-9, "p": 1e-12, "f": 1e-15}
_PATTERN = re.compile(
    r"^\s*(?P<metric>[a-z]+)\s*(?P<op>>=|<=|>|<)\s*(?P<num>[-+]?(?:\d+\.?\d*|\.\d+)(?:e[-+]?\d+)?)\s*(?P<tail>[a-z]*)\s*$"
)


@dataclass(frozen=True, slots=True)
class Requirement:
    """One requirement: metric (a key of METRICS), operator, threshold in the metric's unit, and the text it came from."""

    metric: str
    op: str
    threshold: float
    text: str

    def check(self, analysis: LoopAnalysis) -> RequirementOutcome:
        """Evaluate this requirement on an analysis: the value found, passed or not, and why."""
        value, missing = _value(self.metric, analysis)
        name, unit = METRICS[self.metric]
        if value is None:
            return RequirementOutcome(self, None, False, f"{self.text}: fails, {missing}")
        passed = bool(_OPS[self.op](value, self.threshold))
        shown = f"{value:.6g}{(' ' + unit) if unit else ''}"
        note = f" ({missing})" if missing else ""
        return RequirementOutcome(self, value, passed, f"{self.text}: {'passes' if passed else 'fails'}, {name} is {shown}{note}")


@dataclass(frozen=True, slots=True)
class RequirementOutcome:
    """The outcome of Requirement.check: the value found (None when it does not exist), passed, and a one-line reason."""

    requirement: Requirement
    value: float | None
    passed: bool
    reason: str


def _expected(text: str, what: str) -> PlanError:
    metrics = ", ".join(METRICS)
    return PlanError(
        f"cannot read requirement {text!r}: {what}; expected METRIC OP NUMBER such as 'pm>=60' or 'fc>1meg', "
        f"with METRIC one of {metrics}, OP one of >= <= > <, and an optional SI suffix (t g meg k m u n p f)"
    )


def parse_requirement(text: str) -> Requirement:
    """Read "pm>=60"-style text into a Requirement; PlanError saying what was expected otherwise."""
    if not isinstance(text, str):
        raise _expected(repr(text), "it is not text")
    m = _PATTERN.match(text.lower())
    if m is None:
        raise _expected(text, "it does not have the form METRIC OP NUMBER")
    metric, op, tail = m["metric"], m["op"], m["tail"]
    if metric not in METRICS:
        raise _expected(text, f"unknown metric {metric!r}")
    unit = METRICS[metric][1]
    for suffix in sorted(_SUFFIX, key=len, reverse=True):
        if tail.startswith(suffix) and tail[len(suffix) :] in ("", unit):
            break
    else:
        raise _expected(text, f"{tail!r} is not an SI suffix{(' or ' + repr(unit)) if unit else ''}")
    try:
        number = float(m["num"]) * _SUFFIX[suffix]
    except ValueError as exc:  # pragma: no cover - the pattern admits only floats
        raise _expected(text, "the number cannot be read") from exc
    return Requirement(metric, op, number, text.strip())


def parse_requirements(texts: Iterable[str | Requirement]) -> tuple[Requirement, ...]:
    """Parse several requirements (a text may hold several separated by commas); parsed ones pass through, order kept."""
    out: list[Requirement] = []
    for text in texts:
        if isinstance(text, Requirement):
            out.append(text)
        else:
            out.extend(parse_requirement(part) for part in text.split(",") if part.strip())
    return tuple(out)


def _value(metric: str, a: LoopAnalysis) -> tuple[float | None, str]:
    """(value, note): the metric's value, or None and why it does not exist."""
    m = a.margins
    no_pm = "the loop does not regulate (|T| never reaches 0 dB)" if not a.regulates else "there is no gain crossover in the sweep"
    if metric in ("pm", "fc", "dm"):
        value = {"pm": m.phase_margin_deg, "fc": m.unity_gain_hz, "dm": m.delay_margin_s}[metric]
        if value is not None:
            return value, ""
        return None, "no gain crossover has a positive phase margin" if metric == "dm" and a.gain_crossovers else no_pm
    if metric == "mm":
        return m.modulus_margin, ""
    if metric == "dc":
        return a.dc_gain_db, ""
    if metric == "peak":
        return a.peaking.peak_db, ""
    value = m.gain_margin_db if metric == "gm" else m.lower_gain_margin_db
    if value is not None:
        return value, ""
    kind = "upper" if metric == "gm" else "lower"
    if a.nyquist.stable and a.nyquist.reliable and not any(c.kind == kind for c in a.phase_crossovers):
        way = "rise" if kind == "upper" else "fall"
        return math.inf, f"no {kind} phase crossover in the sweep: the gain may {way} without limit as far as the data shows"
    if not a.nyquist.stable:
        return None, "the loop is unstable, so it has no lower gain margin" if kind == "lower" else "the loop is unstable"
    return None, f"the Nyquist count is not reliable ({'; '.join(a.nyquist.reasons)})"
