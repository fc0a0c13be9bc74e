"""Read a statistical plan: a corner plan (netloop.jobs.corners) with a [samples] table, into a frozen SamplePlan.

    [samples]
    count = 200            # samples at each corner of the plan (required)
    first_seed = 1         # ngspice's seed of the first sample; sample i has first_seed + i - 1 (default 1)
    target = "99%"         # the yield to show (optional; also --target): decides the verdict
    confidence = "95%"     # of the bounds and the verdict (default 95 %; also --confidence)

Fractions are written "99%", "99.9 %" or 0.99.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path

import tomllib

from netloop.errors import PlanError
from netloop.jobs.corners.plan import Plan, find_line, parse_plan, read_plan_text

__all__ = ["MAX_SEED", "SamplePlan", "load_sample_plan", "parse_fraction", "parse_sample_plan"]

MAX_SEED = 2**31 - 1  # ngspice keeps its seed in a C int
_KEYS = ("count", "first_seed", "target", "confidence")


@dataclass(frozen=True, slots=True)
class SamplePlan:
    """A corner plan and its samples: ``count`` samples at each corner, seeds ``first_seed`` .. first_seed + count - 1.

    Sample i has the same seed at every corner, so ngspice draws the same mismatch for it at each (one die measured
    at every corner)."""

    plan: Plan
    count: int
    first_seed: int = 1
    target: float | None = None  # the yield to show, a fraction; None: none named
    confidence: float = 0.95
    line: int = 1  # the [samples] table's line

    @property
    def seeds(self) -> range:
        """The seed of each sample, in sample order."""
        return range(self.first_seed, self.first_seed + self.count)


def parse_fraction(value: object, what: str) -> float:
    """A fraction strictly between 0 and 1 written "99%", "99.9 %" or 0.99; ValueError saying how to write it."""
    if isinstance(value, bool):
        raise ValueError(f"{what} must be a fraction such as \"99%\" or 0.99, got {value!r}")
    if isinstance(value, str):
        m = re.fullmatch(r"\s*([0-9]*\.?[0-9]+(?:[eE][-+]?[0-9]+)?)\s*(%?)\s*", value)
        if m is None:
            raise ValueError(f"{what} must be a fraction such as \"99%\" or 0.99, got {value!r}")
        number = float(m[1]) / (100.0 if m[2] else 1.0)
        if not m[2] and number >= 1:
            raise ValueError(f"{what} {value!r} is ambiguous: write \"{value}%\" for a percentage, or a fraction below 1")
    elif isinstance(value, (int, float)):
        number = float(value)
        if number >= 1:
            raise ValueError(f"{what} {value!r} is ambiguous: write \"{value}%\" for a percentage, or a fraction below 1")
    else:
        raise ValueError(f"{what} must be a fraction such as \"99%\" or 0.99, got {value!r}")
    if not (0 < number < 1) or not math.isfinite(number):
        raise ValueError(f"{what} must lie strictly between 0 and 100 %, got {value!r}")
    return number


def _whole(value: object, where: str, what: str, low: int, high: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise PlanError(f"{where}: {what} must be a whole number, got {value!r}")
    if not low <= value <= high:
        raise PlanError(f"{where}: {what} must be from {low} to {high}, got {value}")
    return value


def parse_sample_plan(text: str, path: str = "<string>") -> SamplePlan:
    """Read a statistical plan's text: the corner plan as netloop.jobs.corners reads it, and its [samples] table."""
    plan = parse_plan(text, path, extra=frozenset({"samples"}))
    table = tomllib.loads(text).get("samples")  # valid TOML: parse_plan read it

    def where(*keys: str) -> str:
        return f"{path}:{find_line(text, 'samples', *keys)}"

    if table is None:
        raise PlanError(f"{path}:1: a statistical plan needs a [samples] table with count = N (the samples at each corner); "
                        "a plan without one is a corner plan: run it with 'netloop corners'")
    if not isinstance(table, dict):
        raise PlanError(f"{where()}: samples must be a table: [samples] with count = N")
    for key in table:
        if key not in _KEYS:
            raise PlanError(f"{where(key)}: unknown key {key!r} in [samples]; expected one of {', '.join(_KEYS)}")
    if "count" not in table:
        raise PlanError(f"{where()}: [samples] needs count = N, the samples at each corner")
    count = _whole(table["count"], where("count"), "count", 1, 1_000_000)
    first = _whole(table.get("first_seed", 1), where("first_seed"), "first_seed", 1, MAX_SEED - count + 1)
    fractions = {}
    for key in ("target", "confidence"):
        if key in table:
            try:
                fractions[key] = parse_fraction(table[key], key)
            except ValueError as exc:
                raise PlanError(f"{where(key)}: {exc}") from exc
    return SamplePlan(plan, count, first, fractions.get("target"), fractions.get("confidence", 0.95), find_line(text, "samples"))


def load_sample_plan(path: str | Path) -> SamplePlan:
    """Read a statistical plan file; PlanError (file:line) when it cannot be read."""
    return parse_sample_plan(*read_plan_text(path))
