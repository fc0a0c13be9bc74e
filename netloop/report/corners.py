"""Corner runs presented together: the outcome record, a text table worst first, its CSV and JSON forms.

A corner's verdict is one of (worst first):

    error      the simulation (or any stage before the analysis) failed: no result
    unstable   the Nyquist count says unstable
    fail       stable, but a requirement failed
    pass       stable and every requirement met

Within a verdict, corners are sorted by worst phase margin, smallest first; a corner with no phase
margin (no gain crossover) sorts before those that have one, since nothing is known of its margin.
"""

from __future__ import annotations

import csv
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path

from netloop.jobs.loop_result import LoopResult
from netloop.report import corner_records as records
from netloop.report.corner_records import CORNERS_SCHEMA, VERDICTS, corner_entry, failed_requirements, margin, verdict_counts, worst_first_key
from netloop.jobs.document import to_document
from netloop.report.files import output_file
from netloop.report.notation import db, deg, eng

__all__ = [
    "CORNER_COLUMNS",
    "VERDICTS",
    "CornerOutcome",
    "corner_document",
    "corner_summary",
    "corner_table",
    "sort_worst_first",
    "write_corner_csv",
]

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
            return {"corner": self.label, "at": "", "outcome": "error", "loop": None, "error": self.error}
        loop = to_document(self.result)
        return {"corner": self.label, "at": self.result.breaks.node, "outcome": "pass" if self.result.passed else "fail",
                "loop": loop, "error": None}

    @property
    def verdict(self) -> str:
        """"error", "unstable", "fail" or "pass" (see the module docstring)."""
        return records.verdict(self.record)

    @property
    def passed(self) -> bool:
        return self.verdict == "pass"


def sort_worst_first(outcomes: Iterable[CornerOutcome]) -> list[CornerOutcome]:
    """The outcomes ordered error, unstable, fail, pass, and by phase margin within each (stable sort)."""
    return [o for o, _ in _worst_first(outcomes)]


def _worst_first(outcomes: Iterable[CornerOutcome]) -> list[tuple[CornerOutcome, dict]]:
    """Each outcome with its record, worst first (a stable sort on records.worst_first_key)."""
    return sorted(((o, o.record) for o in outcomes), key=lambda pair: worst_first_key(pair[1]))


def _note(o: CornerOutcome, r: dict) -> str:
    if o.result is None:
        return (o.error or "").splitlines()[0] if o.error else ""
    failed = ", ".join(failed_requirements(r))
    if records.verdict(r) == "unstable":
        z = r["loop"]["stability"]["closed_loop_rhp_poles"]
        return f"{z} RHP pole(s)" + (f"; {failed}" if failed else "")
    return failed


def _row(o: CornerOutcome, r: dict) -> tuple[str, ...]:
    if o.result is None:
        return (o.label, "ERROR", "", "", "", "", _note(o, r))
    pm, gm, lgm = (margin(r, k, infinite=True) for k in ("phase_margin_deg", "gain_margin_db", "lower_gain_margin_db"))
    return (o.label, records.verdict(r).upper(), "none" if pm is None else deg(pm), eng(margin(r, "unity_gain_hz", infinite=True), "Hz"),
            "none" if gm is None else db(gm), "" if lgm is None else db(lgm), _note(o, r))


def corner_summary(outcomes: Iterable[CornerOutcome]) -> str:
    """One line: how many corners passed, failed (and why) or could not be simulated, and the worst phase margin."""
    return _summary([o.record for o in outcomes])


def _summary(recs: list[dict]) -> str:
    counts = verdict_counts(recs)
    failed = counts["unstable"] + counts["fail"]
    text = f"{len(recs)} corner(s): {counts['pass']} pass, {failed} fail ({counts['unstable']} unstable, {counts['fail']} failed requirement)"
    text += f", {counts['error']} simulation error(s)"
    with_pm = [r for r in recs if margin(r, "phase_margin_deg") is not None]
    if with_pm:
        worst = min(with_pm, key=lambda r: margin(r, "phase_margin_deg"))
        text += f"; worst phase margin {deg(margin(worst, 'phase_margin_deg'))} at {worst['corner']}"
    return text


def corner_table(outcomes: Iterable[CornerOutcome]) -> str:
    """A text table, worst corner first (corner, verdict, PM, crossover, GM, lower GM, failed requirement or error), then the summary."""
    pairs = _worst_first(outcomes)
    head = ("corner", "verdict", "phase margin", "crossover", "gain margin", "lower GM", "failed / error")
    rows = [head, *(_row(o, r) for o, r in pairs)]
    widths = [max(len(r[i]) for r in rows) for i in range(len(head) - 1)]
    lines = []
    for r in rows:
        cells = [r[0].ljust(widths[0]), r[1].ljust(widths[1]), *(c.rjust(w) for c, w in zip(r[2:-1], widths[2:])), r[-1]]
        lines.append("  ".join(cells).rstrip())
    lines.insert(1, "-" * max(len(line) for line in lines))
    lines.append(_summary([r for _, r in pairs]))
    return "\n".join(lines) + "\n"


CORNER_COLUMNS = (
    "corner",
    "verdict",
    "phase_margin_deg",
    "unity_gain_hz",
    "gain_margin_db",
    "phase_crossover_hz",
    "lower_gain_margin_db",
    "modulus_margin",
    "delay_margin_s",
    "dc_loop_gain_db",
    "closed_loop_rhp_poles",
    "failed_requirements",
    "error",
)
"""Columns of write_corner_csv. An empty cell means the quantity does not exist (or the corner failed)."""


def _csv_row(o: CornerOutcome, r: dict) -> list[str]:
    def num(key: str) -> str:
        x = margin(r, key, infinite=True)
        return "" if x is None else repr(float(x))

    if o.result is None:
        return [o.label, "error", *[""] * (len(CORNER_COLUMNS) - 3), o.error or ""]
    loop = r["loop"]
    dc = loop["dc_loop_gain_db"]
    if dc is None and loop["infinite"].get("dc_loop_gain_db") in ("+inf", "-inf"):
        dc = float(loop["infinite"]["dc_loop_gain_db"])
    return [
        o.label,
        records.verdict(r),
        *(num(k) for k in CORNER_COLUMNS[2:9]),
        "" if dc is None else repr(float(dc)),
        str(loop["stability"]["closed_loop_rhp_poles"]),
        ";".join(failed_requirements(r)),
        "",
    ]


def write_corner_csv(outcomes: Iterable[CornerOutcome], path: str | Path) -> Path:
    """Write one row per corner, worst first (columns CORNER_COLUMNS, csv-module quoting); returns the path."""
    rows = [_csv_row(o, r) for o, r in _worst_first(outcomes)]
    with output_file(path, "corner table") as out, out.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(CORNER_COLUMNS)
        writer.writerows(rows)
    return out


def corner_document(outcomes: Iterable[CornerOutcome], **extra) -> dict:
    """JSON document of a corner run: {"schema": "netloop.corners/1", "corners": [{label, verdict, error, loop}], "counts", "passed"}.

    ``loop`` is to_document() of the corner's result, or null for a corner that failed to simulate.
    Corners keep the order given (the plan's order); ``counts`` has one entry per verdict.
    """
    recs = [o.record for o in outcomes]
    return {
        "schema": CORNERS_SCHEMA,
        **extra,
        "corners": [corner_entry(r) for r in recs],
        "counts": verdict_counts(recs),
        "passed": all(records.verdict(r) == "pass" for r in recs),
    }
