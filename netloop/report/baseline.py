"""A corner run against its baseline, presented: summary line, table of changes, regressions, JSON, JUnit suite."""

from __future__ import annotations

import math
import xml.etree.ElementTree as ET

from netloop.jobs.runs.baseline import BaselineComparison, Change, FigureChange, Regression
from netloop.jobs.runs.figures import FIGURES, MAP_FIGURES
from netloop.jobs.runs.limits import Limit
from netloop.report.notation import NONE, eng

__all__ = ["baseline_document", "change_cells", "changes_table", "figure_text", "limit_text", "ordered_changes", "regression_sentence",
           "regression_suite", "summary_line"]


def figure_text(metric: str, value: float | None) -> str:
    """A figure as printed: "52.33 deg", "13.0 MHz", "0.767" (the modulus margin, a ratio, as the loop's own report gives
    it), "inf dB" (no phase crossover), "-" (none)."""
    if value is None:
        return NONE
    if math.isinf(value):
        return f"{'inf' if value > 0 else '-inf'} {FIGURES[metric].unit}".rstrip()
    unit = FIGURES[metric].unit
    if unit in ("deg", "dB"):
        return f"{value:.2f} {unit}"
    if not unit:
        return f"{value:.3f}"
    return eng(value, unit)


def _delta(f: FigureChange) -> str:
    d = f.delta
    if d is None:
        return ""
    if FIGURES[f.metric].unit in ("Hz", "s", ""):
        return f"{d / f.before * 100:+.1f} %" if f.before else ""
    return f"{d:+.2f}"


def change_cells(c: Change) -> list[str]:
    """One cell per MAP_FIGURES figure: "52.33 -> 48.70 deg (-3.63)", or "-" when not compared."""
    cells = []
    for metric in MAP_FIGURES:
        f = c.figure(metric)
        if f is None:
            cells.append(NONE)
            continue
        before, now = figure_text(metric, f.before), figure_text(metric, f.now)
        delta = _delta(f)
        if before == now:
            cells.append(f"{now} (same)" if now != NONE else NONE)
        else:
            cells.append(f"{before} -> {now}" + (f" ({delta})" if delta else ""))
    return cells


def _allowed(lim: Limit) -> str:
    """A limit's amount as it reads: "2 deg", "10 %", "1.00 MHz", "0.1" (a ratio: no unit, no SI prefix)."""
    unit = FIGURES[lim.metric].unit
    if lim.percent:
        return f"{lim.amount:g} %"
    if unit in ("deg", "dB", ""):
        return f"{lim.amount:g} {unit}".rstrip()
    return eng(lim.amount, unit)


def limit_text(lim: Limit) -> str:
    """How a limit reads: "pm may fall by at most 2 deg", "peak may rise by at most 1 dB", "fc may fall by at most 10 %"."""
    way = "rise" if FIGURES[lim.metric].worse > 0 else "fall"
    return f"{lim.metric} may {way} by at most {_allowed(lim)}"


def regression_sentence(reg: Regression, *, several_nodes: bool = False) -> str:
    """"iload=100m/esr=1: phase margin fell by 3.63 deg (52.33 -> 48.70 deg), more than the 2 deg allowed"."""
    f = FIGURES[reg.metric]
    where = f"{reg.corner} at {reg.at}" if several_nodes and reg.at else reg.corner
    if reg.now is None:
        return f"{where}: {f.name} was {figure_text(reg.metric, reg.before)} and is gone now (limit: {limit_text(reg.limit)})"
    way = "rose" if f.worse > 0 else "fell"
    if math.isinf(reg.before or 0.0):
        size = ""
    elif reg.limit.percent:
        size = f" by {abs(reg.now - reg.before) / abs(reg.before) * 100:.1f} %" if reg.before else ""
    else:
        size = " by " + figure_text(reg.metric, abs(reg.now - reg.before))
    return (f"{where}: {f.name} {way}{size} ({figure_text(reg.metric, reg.before)} -> {figure_text(reg.metric, reg.now)}), "
            f"more than the {_allowed(reg.limit)} allowed")


def _several(cmp: BaselineComparison) -> bool:
    return len({c.at for c in cmp.changes if c.at} | {at for _, at in cmp.new + cmp.vanished if at}) > 1


def summary_line(cmp: BaselineComparison) -> str:
    """"against the baseline FILE: 12 corners compared, 1 regression (pm may fall by at most 2 deg; ...), 0 new, 0 vanished"."""
    compared = sum(1 for c in cmp.changes if not c.not_compared)
    n = len(cmp.regressions)
    limits = "; ".join(limit_text(lim) for lim in cmp.limits) or "no limits set: changes are shown, none fails the run"
    return (f"against the baseline {cmp.baseline}: {compared} of {len(cmp.changes)} corner(s) in both runs compared, "
            f"{n} regression{'s' if n != 1 else ''} beyond the limits ({limits}), {len(cmp.new)} new, {len(cmp.vanished)} vanished")


def ordered_changes(cmp: BaselineComparison) -> list[Change]:
    """Regressions first, then corners not compared, then by the change of phase margin (largest fall first)."""
    def key(c: Change) -> tuple:
        pm = c.figure("pm")
        delta = pm.delta if pm is not None and pm.delta is not None else math.inf
        return (0 if c.regressions else 1 if c.not_compared else 2, delta, c.corner, c.at)

    return sorted(cmp.changes, key=key)


def changes_table(cmp: BaselineComparison) -> str:
    """The corners in both runs, regressions first, then by the change of phase margin (largest fall first)."""
    several = _several(cmp)
    head = ["corner", *(["at"] if several else []), *(FIGURES[m].name for m in MAP_FIGURES), "note"]
    rows = []
    for c in ordered_changes(cmp):
        note = "; ".join(f"REGRESSION {r.metric} (limit: {limit_text(r.limit)})" for r in c.regressions) or c.not_compared or NONE
        rows.append([c.corner, *([c.at] if several else []), *change_cells(c), note])
    widths = [max(len(str(x)) for x in col) for col in zip(head, *rows)]
    lines = ["  ".join(str(x).ljust(w) for x, w in zip(row, widths)).rstrip() for row in (head, *rows)]
    lines.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(lines)


def _number(value: float | None) -> float | str | None:
    if value is None or math.isfinite(value):
        return value
    return "+inf" if value > 0 else "-inf"


def baseline_document(cmp: BaselineComparison) -> dict:
    """The comparison as JSON (the ``baseline`` object of the run document): the file, limits, each corner's figures
    before and now, regressions, new and vanished corners, and its verdict ("fail" when anything regressed).
    An infinite figure (a gain margin with no phase crossover) is the string "+inf"."""
    return {
        "file": cmp.baseline,
        "limits": [{"text": lim.text, "figure": lim.metric, "amount": lim.amount, "percent": lim.percent} for lim in cmp.limits],
        "changes": [{"corner": c.corner, "at": c.at, "outcome_before": c.outcome_before, "outcome_now": c.outcome_now,
                     "compared": not c.not_compared, "not_compared": c.not_compared or None,
                     "figures": {f.metric: {"before": _number(f.before), "now": _number(f.now), "change": f.delta} for f in c.figures},
                     "regressions": [r.metric for r in c.regressions]} for c in cmp.changes],
        "regressions": [{"corner": r.corner, "at": r.at, "figure": r.metric, "before": _number(r.before), "now": _number(r.now),
                         "limit": r.limit.text, "reason": regression_sentence(r)} for r in cmp.regressions],
        "new": [{"corner": k, "at": a} for k, a in cmp.new],
        "vanished": [{"corner": k, "at": a} for k, a in cmp.vanished],
        "verdict": cmp.verdict,
    }


def regression_suite(cmp: BaselineComparison, suite: str) -> ET.Element:
    """A JUnit <testsuite> named "SUITE vs baseline": one test case per corner in both runs, a <failure
    type="regression"> for each that got worse than a limit allows; new and vanished corners in its <system-out>."""
    several = _several(cmp)
    failures = sum(1 for c in cmp.changes if c.regressions)
    ts = ET.Element("testsuite", name=f"{suite} vs baseline", tests=str(len(cmp.changes)), failures=str(failures), errors="0",
                    skipped="0", time="0.000")
    props = ET.SubElement(ts, "properties")
    ET.SubElement(props, "property", name="baseline", value=cmp.baseline)
    for lim in cmp.limits:
        ET.SubElement(props, "property", name=f"limit.{lim.metric}", value=lim.text)
    for c in cmp.changes:
        name = f"{c.corner} at {c.at}" if several and c.at else c.corner
        tc = ET.SubElement(ts, "testcase", classname=f"netloop.baseline.{suite}", name=name, time="0.000")
        if c.regressions:
            why = [regression_sentence(r, several_nodes=several) for r in c.regressions]
            el = ET.SubElement(tc, "failure", message="; ".join(why)[:500], type="regression")
            el.text = "\n".join(why)
        out = ET.SubElement(tc, "system-out")
        out.text = c.not_compared or "; ".join(f"{FIGURES[m].name} {cell}" for m, cell in zip(MAP_FIGURES, change_cells(c)))
    text = [summary_line(cmp)]
    text += [f"new (not in the baseline): {k}{f' at {a}' if several and a else ''}" for k, a in cmp.new]
    text += [f"vanished (in the baseline, not in this run): {k}{f' at {a}' if several and a else ''}" for k, a in cmp.vanished]
    ET.SubElement(ts, "system-out").text = "\n".join(text)
    return ts
