"""Pass/fail requirements on a loop analysis, written as text such as "pm>=60" or "fc > 1meg".

Grammar: METRIC OP VALUE, spaces allowed between the parts; METRIC and OP in any case.

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
    VALUE   a number in the metric's unit, written as an engineer means it (netloop.analysis.quantities):
            fc>=100MHz and fc>=100meg are 1e8 Hz, dm>=1ns is 1e-9 s, pm>=45deg, gm>=10dB; the unit word is
            optional (fc>=1meg) and only the metric's own; a bare M (fc>=100M) and 100mhz are refused
            as ambiguous, with what to write instead

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

from netloop.analysis.quantities import UNITS, parse_quantity
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
_PATTERN = re.compile(r"^\s*(?P<metric>[A-Za-z]+)\s*(?P<op>>=|<=|>|<)\s*(?P<value>.*?)\s*$", re.S)


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
        shown = f"{value:.6g}{(' ' + UNITS[unit]) if unit else ''}"
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
        f"cannot read requirement {text!r}: {what}; expected METRIC OP VALUE such as 'pm>=60', 'fc>100MHz' or 'dm>=1ns', "
        f"with METRIC one of {metrics} and OP one of >= <= > <"
    )


def parse_requirement(text: str) -> Requirement:
    """Read "pm>=60"-style text into a Requirement; PlanError saying what was expected otherwise."""
    if not isinstance(text, str):
        raise _expected(repr(text), "it is not text")
    m = _PATTERN.match(text)
    if m is None:
        raise _expected(text, "it does not have the form METRIC OP VALUE")
    metric, op = m["metric"].lower(), m["op"]
    if metric not in METRICS:
        raise _expected(text, f"unknown metric {metric!r}")
    try:
        number = parse_quantity(m["value"], METRICS[metric][1])
    except PlanError as exc:
        raise _expected(text, f"{METRICS[metric][0]}: {exc}") from exc
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
