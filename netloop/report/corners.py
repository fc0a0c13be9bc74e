"""Corner runs from LoopResults: CornerOutcome turned into a corner record, presented by netloop.report.corner_records.

A library user who measured corners with ``measure()`` hands CornerOutcomes here; each becomes the
same record the corners stage stores, so the verdicts (error, inconclusive, unstable, fail, pass),
the worst-first order, the table, the CSV and the JUnit XML are decided in one place
(netloop.report.corner_records) whatever ran the corners.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path

from netloop.jobs.document import to_document
from netloop.jobs.loop_result import LoopResult
from netloop.report import corner_records as records
from netloop.report.corner_records import CORNERS_SCHEMA, VERDICTS, corner_entry, verdict_counts

__all__ = [
    "CORNER_COLUMNS",
    "VERDICTS",
    "CornerOutcome",
    "corner_document",
    "corner_summary",
    "corner_table",
    "junit_xml",
    "sort_worst_first",
    "write_corner_csv",
]

CORNER_COLUMNS = records.CSV_FIELDS
"""Columns of write_corner_csv. An empty cell means the quantity does not exist (or the corner was not measured)."""


@dataclass(frozen=True, slots=True)
class CornerOutcome:
    """One corner of a run: its label and either the measured loop or the error message (exactly one of them)."""

    label: str
    result: LoopResult | None
    error: str | None = None

    def __post_init__(self) -> None:
        if (self.result is None) == (self.error is None):
            raise ValueError(f"corner {self.label!r}: give either a result or an error, not {'both' if self.result else 'neither'}")

    @property
    def record(self) -> dict:
        """This outcome as a corner record of netloop.report.corner_records (the shape the corners stage stores)."""
        if self.result is None:
            return {"corner": self.label, "at": "", "outcome": "error", "loop": None, "error": self.error,
                    "settings": {}, "seconds": 0.0, "simulator_output": None}
        return {"corner": self.label, "at": self.result.breaks.node, "outcome": self.result.verdict,
                "loop": to_document(self.result), "error": None, "settings": {}, "seconds": self.result.sim.seconds,
                "simulator_output": None}

    @property
    def verdict(self) -> str:
        """"error", "inconclusive", "unstable", "fail" or "pass" (netloop.report.corner_records.VERDICTS)."""
        return records.verdict(self.record)

    @property
    def passed(self) -> bool:
        return self.verdict == "pass"


def _records(outcomes: Iterable[CornerOutcome]) -> tuple[dict, ...]:
    return tuple(o.record for o in outcomes)


def sort_worst_first(outcomes: Iterable[CornerOutcome]) -> list[CornerOutcome]:
    """The outcomes ordered error, inconclusive, unstable, fail, pass, and by phase margin within each (stable sort)."""
    pairs = [(o, o.record) for o in outcomes]
    return [o for o, _ in sorted(pairs, key=lambda pair: records.worst_first_key(pair[1]))]


def corner_summary(outcomes: Iterable[CornerOutcome]) -> str:
    """One line: how many corners have each verdict (netloop.report.corner_records.counts_line)."""
    return records.counts_line(_records(outcomes))


def corner_table(outcomes: Iterable[CornerOutcome]) -> str:
    """The table worst corner first (netloop.report.corner_records.corner_table), a blank line and the counts."""
    recs = _records(outcomes)
    return f"{records.corner_table(recs)}\n\n{records.counts_line(recs)}\n"


def write_corner_csv(outcomes: Iterable[CornerOutcome], path: str | Path) -> Path:
    """Write one row per corner, worst first (columns CORNER_COLUMNS); returns the path."""
    return records.write_corner_csv(_records(outcomes), path)


def junit_xml(outcomes: Iterable[CornerOutcome], suite_name: str) -> str:
    """The JUnit XML document of the outcomes (netloop.report.corner_records.junit_xml)."""
    return records.junit_xml(_records(outcomes), suite_name)


def corner_document(outcomes: Iterable[CornerOutcome], **extra) -> dict:
    """JSON document of a corner run: {"schema": "netloop.corners/1", "corners": [{label, verdict, error, loop}], "counts", "passed"}.

    ``loop`` is to_document() of the corner's result, or null for a corner that failed to simulate.
    Corners keep the order given (the plan's order); ``counts`` has one entry per verdict.
    """
    recs = _records(outcomes)
    verdicts = {records.verdict(r) for r in recs}
    verdict = "fail" if verdicts & {"error", "unstable", "fail"} else "inconclusive" if "inconclusive" in verdicts else "pass"
    return {
        "schema": CORNERS_SCHEMA,
        **extra,
        "corners": [corner_entry(r) for r in recs],
        "counts": verdict_counts(recs),
        "verdict": verdict,
        "passed": verdict == "pass",
    }
