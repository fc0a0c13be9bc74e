"""The worst phase margin of each corner over several results files (oldest first), for a trend view."""

from __future__ import annotations

import math
from dataclasses import dataclass

from netloop.jobs.runs.figures import figure_value, measured
from netloop.jobs.runs.results import ResultsFile

__all__ = ["Trend", "TrendRow", "trend_of", "worst_phase_margin"]


@dataclass(frozen=True, slots=True)
class TrendRow:
    """One corner over the runs: its worst phase margin in each (over its break nodes), and what each run found."""

    corner: str
    phase_margin_deg: tuple[float | None, ...]  # one per run; None where the run has no phase margin for it
    outcomes: tuple[str, ...]  # one per run: "pass", "fail", "inconclusive", "error", or "" (not in that run)

    @property
    def latest_drop_deg(self) -> float | None:
        """How much the worst phase margin fell from the first run that has one to the last (negative: it rose)."""
        known = [p for p in self.phase_margin_deg if p is not None]
        if len(known) < 2 or self.phase_margin_deg[-1] is None:
            return None
        return known[0] - self.phase_margin_deg[-1]


@dataclass(frozen=True, slots=True)
class Trend:
    """The runs in the order given (oldest first) and one row per corner, in the order corners first appear."""

    runs: tuple[ResultsFile, ...]
    rows: tuple[TrendRow, ...]


def worst_phase_margin(records) -> tuple[float | None, str]:
    """The lowest phase margin of a corner's records (its break nodes) that were measured, and the worst outcome."""
    order = ("error", "inconclusive", "fail", "pass")
    outcome = min((str(r["outcome"]) for r in records), key=lambda o: order.index(o) if o in order else 0)
    values = [figure_value(r, "pm") for r in records if measured(r)]
    values = [v for v in values if v is not None and not math.isnan(v)]
    return (min(values) if values else None), outcome


def trend_of(runs: tuple[ResultsFile, ...]) -> Trend:
    """The worst phase margin of every corner in each run; a corner missing from a run has None and outcome ""."""
    names: dict[str, None] = {}
    for run in runs:
        for r in run.records:
            names.setdefault(str(r["corner"]), None)
    rows = []
    for name in names:
        pms, outcomes = [], []
        for run in runs:
            mine = [r for r in run.records if str(r["corner"]) == name]
            if not mine:
                pms.append(None)
                outcomes.append("")
                continue
            pm, outcome = worst_phase_margin(mine)
            pms.append(pm)
            outcomes.append(outcome)
        rows.append(TrendRow(name, tuple(pms), tuple(outcomes)))
    return Trend(tuple(runs), tuple(rows))
