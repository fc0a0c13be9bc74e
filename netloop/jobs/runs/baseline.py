"""A corner run against an earlier results file (its baseline), corner by corner and loop by loop.

Each corner and break node found in both runs is one Change: its figures before and now (pm, gm, fc, peak)
and the limits it broke (netloop.jobs.runs.limits). A corner measured in only one of the runs is new or
vanished. Figures are compared only where both runs measured the loop and its self-checks passed; a corner
that could not be measured, or has no verdict, fails or is inconclusive in its own run already.
"""

from __future__ import annotations

from dataclasses import dataclass

from netloop.jobs.runs.figures import MAP_FIGURES, figure_value, measured
from netloop.jobs.runs.limits import Limit

__all__ = ["BaselineComparison", "Change", "FigureChange", "Regression", "compare_runs"]


@dataclass(frozen=True, slots=True)
class FigureChange:
    """One figure of one loop in the baseline and now (None where the loop has no such figure; +-inf as documented)."""

    metric: str
    before: float | None
    now: float | None

    @property
    def delta(self) -> float | None:
        """now - before, when both exist and are finite; else None."""
        if self.before is None or self.now is None or abs(self.before) == float("inf") or abs(self.now) == float("inf"):
            return None
        return self.now - self.before


@dataclass(frozen=True, slots=True)
class Regression:
    """A figure that got worse than its limit allows."""

    corner: str
    at: str
    metric: str
    before: float | None
    now: float | None
    limit: Limit


@dataclass(frozen=True, slots=True)
class Change:
    """One corner and break node in both runs: outcomes, figures, and the limits it broke."""

    corner: str
    at: str
    outcome_before: str  # the records' outcomes: "pass", "fail", "inconclusive", "error"
    outcome_now: str
    figures: tuple[FigureChange, ...]  # one per MAP_FIGURES (empty when not compared)
    regressions: tuple[Regression, ...]
    not_compared: str = ""  # why the figures were not compared ("" when they were)

    def figure(self, metric: str) -> FigureChange | None:
        return next((f for f in self.figures if f.metric == metric), None)


@dataclass(frozen=True, slots=True)
class BaselineComparison:
    """This run against its baseline."""

    baseline: str  # the baseline's results file
    limits: tuple[Limit, ...]
    changes: tuple[Change, ...]  # corners in both runs, in this run's order
    new: tuple[tuple[str, str], ...]  # (corner, break node) in this run only
    vanished: tuple[tuple[str, str], ...]  # (corner, break node) in the baseline only

    @property
    def regressions(self) -> tuple[Regression, ...]:
        return tuple(reg for c in self.changes for reg in c.regressions)

    @property
    def verdict(self) -> str:
        """"fail" when a figure got worse than a limit allows, else "pass"."""
        return "fail" if self.regressions else "pass"


def _key(record: dict) -> tuple[str, str]:
    return (str(record["corner"]), str(record.get("at") or ""))


def _change(before: dict, now: dict, limits: tuple[Limit, ...]) -> Change:
    corner, at = _key(now)
    outcomes = (str(before["outcome"]), str(now["outcome"]))
    if not measured(before):
        return Change(corner, at, *outcomes, (), (), f"the baseline has no figures for it ({before['outcome']})")
    if not measured(now):
        return Change(corner, at, *outcomes, (), (), f"this run has no figures for it ({now['outcome']})")
    figures = tuple(FigureChange(m, figure_value(before, m), figure_value(now, m)) for m in MAP_FIGURES)
    regressions = []
    for lim in limits:
        old, new = figure_value(before, lim.metric), figure_value(now, lim.metric)
        if lim.exceeded(old, new):
            regressions.append(Regression(corner, at, lim.metric, old, new, lim))
    return Change(corner, at, *outcomes, figures, tuple(regressions))


def compare_runs(baseline: tuple[dict, ...], records: tuple[dict, ...], limits: tuple[Limit, ...] = (), *, baseline_path: str = "") -> BaselineComparison:
    """This run's records against the baseline's (both as netloop.jobs.runs.results reads them: one record per
    corner and break node), with ``limits`` on how much worse a figure may get."""
    before = {_key(r): r for r in baseline}
    now_keys = {_key(r) for r in records}
    changes = tuple(_change(before[_key(r)], r, limits) for r in records if _key(r) in before)
    new = tuple(_key(r) for r in records if _key(r) not in before)
    vanished = tuple(_key(r) for r in baseline if _key(r) not in now_keys)
    return BaselineComparison(baseline_path, tuple(limits), changes, new, vanished)
