"""Corner runs presented from their per-corner records: verdicts, worst-first order, table, counts, CSV, JUnit XML, JSON.

A record is one corner measured at one break node, as the corners stage writes it to its results
file (one JSON line): ``corner`` (name), ``at`` (break node), ``outcome`` ("pass", "fail" or
"error"), ``loop`` (the loop's document, netloop.jobs.document.to_document, or null), ``error``,
``settings``, ``seconds``. A resumed run has only these records for the corners finished earlier,
and netloop.report.corners turns its LoopResult outcomes into the same records, so the verdicts
and the order below are decided in this one place.
"""

from __future__ import annotations

import csv
import math
import xml.etree.ElementTree as ET
from pathlib import Path

from netloop.jobs.document import CORNERS_SCHEMA
from netloop.report.files import output_file
from netloop.report.notation import NONE, db, deg, eng

__all__ = [
    "CORNERS_SCHEMA",
    "VERDICTS",
    "corner_entry",
    "corner_table",
    "counts_line",
    "loads_line",
    "failed_requirements",
    "margin",
    "run_document",
    "verdict",
    "verdict_counts",
    "worst_first",
    "worst_first_key",
    "write_corner_csv",
    "write_junit",
]

VERDICTS = ("error", "inconclusive", "unstable", "fail", "pass")
"""The verdicts, worst first."""


def _margins(r: dict) -> dict:
    return (r.get("loop") or {}).get("margins") or {}


def margin(r: dict, key: str, *, infinite: bool = False) -> float | None:
    """``margins.<key>`` of a record's loop; None when it does not exist (with ``infinite``, +-inf where the document says so)."""
    value = _margins(r).get(key)
    if value is None and infinite:
        sign = ((r.get("loop") or {}).get("infinite") or {}).get(f"margins.{key}")
        if sign in ("+inf", "-inf"):
            return math.inf if sign == "+inf" else -math.inf
    return value


def verdict(r: dict) -> str:
    """"error" (not measured), "inconclusive" (a self-check failed: no verdict), "unstable" (Nyquist count),
    "fail" (stable, a requirement failed) or "pass"."""
    if r["outcome"] in ("error", "inconclusive"):
        return r["outcome"]
    if not r["loop"]["stability"]["stable"]:
        return "unstable"
    return "fail" if r["outcome"] == "fail" else "pass"


def verdict_counts(records) -> dict[str, int]:
    """How many records have each verdict, in the order of VERDICTS."""
    v = [verdict(r) for r in records]
    return {k: v.count(k) for k in VERDICTS}


def corner_entry(r: dict) -> dict:
    """A record's entry in the corners document: label, verdict, error and the loop's document."""
    return {"label": r["corner"], "verdict": verdict(r), "error": r["error"], "loop": r["loop"]}


def failed_requirements(r: dict) -> tuple[str, ...]:
    """The texts of the requirements a record failed ("pm>=60")."""
    return tuple(q["text"] for q in (r.get("loop") or {}).get("requirements", ()) if not q["passed"])


def worst_first_key(r: dict) -> tuple[int, float]:
    """Sort key: verdict rank (error first), then phase margin, lowest first; no phase margin sorts first."""
    pm = _margins(r).get("phase_margin_deg")
    return (VERDICTS.index(verdict(r)), -math.inf if pm is None else pm)


def worst_first(records: tuple[dict, ...]) -> tuple[dict, ...]:
    """Errors, then unstable corners, then failed requirements, then the rest; each group by phase margin, lowest first."""
    return tuple(sorted(records, key=lambda r: (*worst_first_key(r), r["corner"], r["at"])))


def _gm(r: dict) -> str:
    if r.get("loop") is None:
        return NONE
    value = margin(r, "gain_margin_db", infinite=True)
    if value == math.inf:
        return "inf"
    return db(None if value == -math.inf else value)


def corner_table(records: tuple[dict, ...]) -> str:
    """A plain-text table, worst corner first: corner, [break node], phase margin, gain margin, crossover, verdict, failed requirement."""
    show_at = len({r["at"] for r in records}) > 1
    head = ["corner", *(["at"] if show_at else []), "phase margin", "gain margin", "crossover", "verdict", "failed requirement"]
    rows = []
    for r in worst_first(records):
        m = _margins(r)
        failed = ", ".join(failed_requirements(r)) if r["outcome"] != "error" else "simulation failed"
        rows.append([r["corner"], *([r["at"]] if show_at else []), deg(m.get("phase_margin_deg")), _gm(r),
                     eng(m.get("unity_gain_hz"), "Hz"), verdict(r), failed or NONE])
    widths = [max(len(str(x)) for x in col) for col in zip(head, *rows)]
    lines = ["  ".join(str(x).ljust(w) for x, w in zip(row, widths)).rstrip() for row in (head, *rows)]
    lines.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(lines)


def counts_line(records: tuple[dict, ...]) -> str:
    """"12 corners: 9 pass, 2 fail a requirement, 0 unstable, 1 error (not measured)"."""
    n = verdict_counts(records)
    parts = [f"{n['pass']} pass", f"{n['fail']} fail a requirement", f"{n['unstable']} unstable", f"{n['error']} error (not measured)"]
    corners, nodes = len({r["corner"] for r in records}), len({r["at"] for r in records})
    if nodes > 1:
        return f"{len(records)} loops measured ({corners} corners at {nodes} break nodes): " + ", ".join(parts)
    return f"{len(records)} corner{'s' if len(records) != 1 else ''}: " + ", ".join(parts)


def loads_line(records: tuple[dict, ...]) -> str | None:
    """"circuit loads: 3 for 18 corners; 15 ran on a circuit another corner had loaded (...)", from the records'
    ``loads``; None when no record says (a results file written before netloop counted them)."""
    known = [r["loads"] for r in records if r.get("loads") is not None]
    if not known:
        return None
    shared = sum(1 for n in known if n == 0)
    what = "corners" if len({r["at"] for r in records}) <= 1 else "measurements"
    line = f"circuit loads: {sum(known)} for {len(records)} {what}"
    if shared:
        line += (f"; {shared} ran on a circuit another corner had loaded, with its temperature, supplies or parameters "
                 "changed in place (share_loads)")
    return line


_CSV_FIELDS = ("corner", "at", "verdict", "phase_margin_deg", "gain_margin_db", "unity_gain_hz", "phase_crossover_hz",
               "modulus_margin", "delay_margin_s", "failed_requirements", "error", "seconds", "settings")


def write_corner_csv(records: tuple[dict, ...], path: str | Path) -> None:
    """One row per corner (worst first); empty cells where a quantity does not exist; settings as k=v pairs."""
    with output_file(path, "corner table") as out, out.open("w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(_CSV_FIELDS)
        for r in worst_first(records):
            m = _margins(r)
            def cell(k: str):
                v = m.get(k)
                return "" if v is None else repr(float(v))
            w.writerow([r["corner"], r["at"], verdict(r), cell("phase_margin_deg"), cell("gain_margin_db"), cell("unity_gain_hz"),
                        cell("phase_crossover_hz"), cell("modulus_margin"), cell("delay_margin_s"),
                        "; ".join(failed_requirements(r)), r.get("error") or "", f"{r['seconds']:.3f}",
                        " ".join(f"{k}={v}" for k, v in r["settings"].items())])


def write_junit(records: tuple[dict, ...], path: str | Path, suite: str) -> None:
    """JUnit XML: one test case per corner (and break node); unstable or a failed requirement is a failure,
    a corner that could not be measured is an error carrying ngspice's message."""
    v = [verdict(r) for r in records]
    n = verdict_counts(records)
    counts = {"tests": str(len(records)), "failures": str(n["fail"] + n["unstable"]), "errors": str(n["error"])}
    total = f"{sum(r['seconds'] for r in records):.3f}"
    root = ET.Element("testsuites", name=suite, **counts, time=total)
    ts = ET.SubElement(root, "testsuite", name=suite, **counts, skipped="0", time=total)
    for r, verdict_ in zip(records, v):
        name = r["corner"] if len({x["at"] for x in records}) == 1 else f"{r['corner']} at {r['at']}"
        tc = ET.SubElement(ts, "testcase", classname=f"netloop.jobs.corners.{suite}", name=name, time=f"{r['seconds']:.3f}")
        m = _margins(r)
        if verdict_ == "error":
            el = ET.SubElement(tc, "error", message=(r.get("error") or "")[:500], type="simulation")
            el.text = r.get("simulator_output") or r.get("error") or ""
        elif verdict_ in ("fail", "unstable"):
            reasons = [q["reason"] for q in r["loop"]["requirements"] if not q["passed"]]
            if verdict_ == "unstable":
                reasons.insert(0, "the loop is unstable by the Nyquist count")
            el = ET.SubElement(tc, "failure", message="; ".join(reasons)[:500], type="unstable" if verdict_ == "unstable" else "requirement")
            el.text = "\n".join(reasons)
        out = ET.SubElement(tc, "system-out")
        out.text = (f"phase margin {deg(m.get('phase_margin_deg'))}, gain margin {_gm(r)}, crossover {eng(m.get('unity_gain_hz'), 'Hz')}; "
                    + " ".join(f"{k}={val}" for k, val in r["settings"].items()))
    ET.indent(root)
    with output_file(path, "JUnit XML") as target:
        ET.ElementTree(root).write(target, encoding="utf-8", xml_declaration=True)


def run_document(run) -> dict:
    """The JSON document of a run, in the shape of netloop.report.corner_document (schema "netloop.corners/1":
    corners with label, verdict, error, loop; counts per verdict; passed) plus each record's break node,
    settings, timing and worker, and the plan, results file and how many corners ran now. Corners worst first."""
    corners = [{**corner_entry(r), **{k: r[k] for k in ("at", "netlist", "settings", "key", "seconds", "sim_seconds", "worker", "simulator_output")}}
               for r in worst_first(run.records)]
    return {
        "schema": CORNERS_SCHEMA,
        "plan": run.plan,
        "results_file": run.results_path,
        "ran": run.ran,
        "skipped": run.skipped,
        "corners": corners,
        "counts": verdict_counts(run.records),
        "passed": run.passed,
    }
