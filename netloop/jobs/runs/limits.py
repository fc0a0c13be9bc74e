"""How much worse than its baseline a figure may get before the run fails: a plan's [regression] table or --limit."""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from netloop.analysis.quantities import parse_quantity
from netloop.analysis.requirements import METRICS
from netloop.errors import PlanError
from netloop.jobs.runs.figures import FIGURES

__all__ = ["Limit", "parse_limit", "parse_limits"]

_PATTERN = re.compile(r"^\s*(?P<metric>[A-Za-z]+)\s*=\s*(?P<amount>.+?)\s*$", re.S)


@dataclass(frozen=True, slots=True)
class Limit:
    """A figure may get worse than its baseline by at most ``amount``: in the figure's unit, or in percent of the
    baseline's value when ``percent``. Worse is lower for every figure but peak, where it is higher."""

    metric: str  # a key of netloop.jobs.runs.figures.FIGURES
    amount: float
    percent: bool
    text: str  # as written: "pm=2deg"

    def allowed(self, baseline: float) -> float:
        """How far the figure may move the worse way from a baseline value."""
        return abs(baseline) * self.amount / 100.0 if self.percent else self.amount

    def exceeded(self, baseline: float | None, now: float | None) -> bool:
        """Whether moving from ``baseline`` to ``now`` is worse than allowed. A figure that existed and is gone is;
        one that appears is not; +-inf (a gain margin with no phase crossover) compares as infinitely large."""
        if baseline is None or (isinstance(baseline, float) and math.isnan(baseline)):
            return False
        if now is None or (isinstance(now, float) and math.isnan(now)):
            return True
        worse = (now - baseline) * FIGURES[self.metric].worse if now != baseline else 0.0
        if math.isnan(worse):
            return False  # inf to inf
        if math.isinf(baseline):
            return worse > 0
        return worse > self.allowed(baseline) * (1 + 1e-12)


def _expected(text: str, what: str) -> PlanError:
    return PlanError(f"cannot read limit {text!r}: {what}; expected FIGURE=AMOUNT such as 'pm=2deg', 'gm=1dB', 'fc=10%' "
                     f"or 'peak=0.5dB', with FIGURE one of {', '.join(FIGURES)}")


def parse_limit(text: str) -> Limit:
    """Read "pm=2deg"-style text; the amount in the figure's unit (netloop.analysis.quantities) or in percent."""
    m = _PATTERN.match(str(text))
    if m is None:
        raise _expected(str(text), "it does not have the form FIGURE=AMOUNT")
    metric, amount = m["metric"].lower(), m["amount"]
    if metric not in FIGURES:
        raise _expected(text, f"unknown figure {metric!r}")
    percent = amount.endswith("%")
    try:
        value = float(amount[:-1]) if percent else parse_quantity(amount, METRICS[metric][1])
    except (PlanError, ValueError) as exc:
        raise _expected(text, f"the amount of {FIGURES[metric].name}: {exc}" if not percent else f"{amount!r} is not a percentage") from exc
    if not math.isfinite(value) or value < 0:
        raise _expected(text, "the amount must be a finite number, 0 or more")
    return Limit(metric, value, percent, str(text).strip())


def parse_limits(texts, given: tuple[Limit, ...] = ()) -> tuple[Limit, ...]:
    """``given`` (a plan's limits) with ``texts`` (--limit) added; a later limit on a figure replaces an earlier one.
    Ordered as FIGURES orders the figures."""
    by_metric = {lim.metric: lim for lim in given}
    for text in texts:
        lim = parse_limit(text)
        by_metric[lim.metric] = lim
    return tuple(by_metric[m] for m in FIGURES if m in by_metric)


def regression_table(raw: object, where: str, base_dir: str) -> tuple[tuple[Limit, ...], str]:
    """A plan's [regression] table: (limits, baseline path or ""). ``where`` is "plan.toml:LINE" for messages.

        [regression]
        baseline = "ldo.baseline.jsonl"   # optional: the results file to compare with (relative to the plan)
        pm = "2deg"                       # the phase margin may fall by at most 2 deg
        fc = "10%"                        # the crossover may fall by at most 10 %
    """
    from pathlib import Path  # noqa: PLC0415

    if not isinstance(raw, dict):
        raise PlanError(f"{where}: regression must be a table ([regression]) of limits such as pm = \"2deg\"")
    baseline = ""
    texts = []
    for key, value in raw.items():
        if key == "baseline":
            if not isinstance(value, str) or not value.strip():
                raise PlanError(f"{where}: regression.baseline must be the path of a results file, e.g. \"ldo.baseline.jsonl\"")
            baseline = str((Path(base_dir) / value).resolve())
            continue
        if isinstance(value, bool) or not isinstance(value, (str, int, float)):
            raise PlanError(f"{where}: regression.{key} must be an amount such as \"2deg\" or \"10%\", got {value!r}")
        texts.append(f"{key}={value}")
    try:
        return parse_limits(texts), baseline
    except PlanError as exc:
        raise PlanError(f"{where}: {exc}") from exc
