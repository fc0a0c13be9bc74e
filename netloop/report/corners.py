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
import math
from collections import Counter
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path

from netloop.loop_result import LoopResult
from netloop.report.document import to_document
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

VERDICTS = ("error", "unstable", "fail", "pass")


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
    def verdict(self) -> str:
        """"error", "unstable", "fail" or "pass" (see the module docstring)."""
        if self.result is None:
            return "error"
        if not self.result.stable:
            return "unstable"
        return "pass" if self.result.passed else "fail"

    @property
    def passed(self) -> bool:
        return self.verdict == "pass"


def _pm(o: CornerOutcome) -> float:
    pm = None if o.result is None else o.result.analysis.margins.phase_margin_deg
    return -math.inf if pm is None else pm


def sort_worst_first(outcomes: Iterable[CornerOutcome]) -> list[CornerOutcome]:
    """The outcomes ordered error, unstable, fail, pass, and by phase margin within each (stable sort)."""
    return sorted(outcomes, key=lambda o: (VERDICTS.index(o.verdict), _pm(o)))


def _note(o: CornerOutcome) -> str:
    if o.result is None:
        return (o.error or "").splitlines()[0] if o.error else ""
    if not o.result.stable:
        z = o.result.analysis.nyquist.closed_loop_rhp_poles
        failed = ", ".join(r.requirement.text for r in o.result.failed_requirements)
        return f"{z} RHP pole(s)" + (f"; {failed}" if failed else "")
    return ", ".join(r.requirement.text for r in o.result.failed_requirements)


def _row(o: CornerOutcome) -> tuple[str, ...]:
    if o.result is None:
        return (o.label, "ERROR", "", "", "", "", _note(o))
    m = o.result.analysis.margins
    pm = deg(m.phase_margin_deg) if m.phase_margin_deg is not None else "none"
    gm = db(m.gain_margin_db) if m.gain_margin_db is not None else "none"
    lgm = db(m.lower_gain_margin_db) if m.lower_gain_margin_db is not None else ""
    return (o.label, o.verdict.upper(), pm, eng(m.unity_gain_hz, "Hz"), gm, lgm, _note(o))


def corner_summary(outcomes: Iterable[CornerOutcome]) -> str:
    """One line: how many corners passed, failed (and why) or could not be simulated, and the worst phase margin."""
    outcomes = list(outcomes)
    counts = Counter(o.verdict for o in outcomes)
    failed = counts["unstable"] + counts["fail"]
    text = f"{len(outcomes)} corner(s): {counts['pass']} pass, {failed} fail ({counts['unstable']} unstable, {counts['fail']} failed requirement)"
    text += f", {counts['error']} simulation error(s)"
    with_pm = [o for o in outcomes if o.result is not None and o.result.analysis.margins.phase_margin_deg is not None]
    if with_pm:
        worst = min(with_pm, key=_pm)
        text += f"; worst phase margin {deg(_pm(worst))} at {worst.label}"
    return text


def corner_table(outcomes: Iterable[CornerOutcome]) -> str:
    """A text table, worst corner first (corner, verdict, PM, crossover, GM, lower GM, failed requirement or error), then the summary."""
    outcomes = sort_worst_first(outcomes)
    head = ("corner", "verdict", "phase margin", "crossover", "gain margin", "lower GM", "failed / error")
    rows = [head, *(_row(o) for o in outcomes)]
    widths = [max(len(r[i]) for r in rows) for i in range(len(head) - 1)]
    lines = []
    for r in rows:
        cells = [r[0].ljust(widths[0]), r[1].ljust(widths[1]), *(c.rjust(w) for c, w in zip(r[2:-1], widths[2:])), r[-1]]
        lines.append("  ".join(cells).rstrip())
    lines.insert(1, "-" * max(len(line) for line in lines))
    lines.append(corner_summary(outcomes))
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


def _csv_row(o: CornerOutcome) -> list[str]:
    def num(x) -> str:
        return "" if x is None else repr(float(x))

    if o.result is None:
        return [o.label, "error", *[""] * (len(CORNER_COLUMNS) - 3), o.error or ""]
    a = o.result.analysis
    m = a.margins
    return [
        o.label,
        o.verdict,
        num(m.phase_margin_deg),
        num(m.unity_gain_hz),
        num(m.gain_margin_db),
        num(m.phase_crossover_hz),
        num(m.lower_gain_margin_db),
        num(m.modulus_margin),
        num(m.delay_margin_s),
        num(a.dc_gain_db),
        str(a.nyquist.closed_loop_rhp_poles),
        ";".join(r.requirement.text for r in o.result.failed_requirements),
        "",
    ]


def write_corner_csv(outcomes: Iterable[CornerOutcome], path: str | Path) -> Path:
    """Write one row per corner, worst first (columns CORNER_COLUMNS, csv-module quoting); returns the path."""
    rows = [_csv_row(o) for o in sort_worst_first(outcomes)]
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
    outcomes = list(outcomes)
    counts = Counter(o.verdict for o in outcomes)
    corners = [
        {"label": o.label, "verdict": o.verdict, "error": o.error, "loop": None if o.result is None else to_document(o.result)}
        for o in outcomes
    ]
    return {
        "schema": "netloop.corners/1",
        **extra,
        "corners": corners,
        "counts": {v: counts[v] for v in VERDICTS},
        "passed": all(o.passed for o in outcomes),
    }
