"""Present a corner run from its journal records: the worst-first table, counts, CSV rows, JUnit XML and the JSON document.

netloop.report.corners presents CornerOutcome objects, which hold LoopResult records; a resumed
run has only the JSON lines of the corners finished earlier, so this module reads the records
instead, with the same verdicts (error, unstable, fail, pass), the same worst-first order and the
same JUnit failure and error types.
"""

from __future__ import annotations

import csv
import math
import xml.etree.ElementTree as ET
from pathlib import Path

from netloop.corners.journal import SCHEMA
from netloop.report.files import output_file
from netloop.report.notation import NONE, db, deg, eng

__all__ = ["corner_table", "counts_line", "run_document", "verdict", "worst_first", "write_corner_csv", "write_junit"]

_RANK = {"error": 0, "unstable": 1, "fail": 2, "pass": 3}


def _margins(r: dict) -> dict:
    return (r.get("loop") or {}).get("margins") or {}


def verdict(r: dict) -> str:
    """"error" (not measured), "unstable" (Nyquist count), "fail" (stable, a requirement failed) or "pass"."""
    if r["outcome"] == "error":
        return "error"
    if not r["loop"]["stability"]["stable"]:
        return "unstable"
    return "fail" if r["outcome"] == "fail" else "pass"


def failed_requirements(r: dict) -> tuple[str, ...]:
    """The texts of the requirements a record failed ("pm>=60")."""
    return tuple(q["text"] for q in (r.get("loop") or {}).get("requirements", ()) if not q["passed"])


def worst_first(records: tuple[dict, ...]) -> tuple[dict, ...]:
    """Errors, then unstable corners, then failed requirements, then the rest; each group by phase margin, lowest first."""
    def key(r: dict) -> tuple:
        pm = _margins(r).get("phase_margin_deg")
        return (_RANK[verdict(r)], -math.inf if pm is None else pm, r["corner"], r["at"])

    return tuple(sorted(records, key=key))


def _gm(r: dict) -> str:
    loop = r.get("loop")
    if loop is None:
        return NONE
    value = _margins(r).get("gain_margin_db")
    if value is None and loop.get("infinite", {}).get("margins.gain_margin_db") == "+inf":
        return "inf"
    return db(value)


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
    v = [verdict(r) for r in records]
    parts = [f"{v.count('pass')} pass", f"{v.count('fail')} fail a requirement",
             f"{v.count('unstable')} unstable", f"{v.count('error')} error (not measured)"]
    corners, nodes = len({r["corner"] for r in records}), len({r["at"] for r in records})
    if nodes > 1:
        return f"{len(records)} loops measured ({corners} corners at {nodes} break nodes): " + ", ".join(parts)
    return f"{len(records)} corner{'s' if len(records) != 1 else ''}: " + ", ".join(parts)


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
    counts = {"tests": str(len(records)), "failures": str(v.count("fail") + v.count("unstable")), "errors": str(v.count("error"))}
    total = f"{sum(r['seconds'] for r in records):.3f}"
    root = ET.Element("testsuites", name=suite, **counts, time=total)
    ts = ET.SubElement(root, "testsuite", name=suite, **counts, skipped="0", time=total)
    for r, verdict_ in zip(records, v):
        name = r["corner"] if len({x["at"] for x in records}) == 1 else f"{r['corner']} at {r['at']}"
        tc = ET.SubElement(ts, "testcase", classname=f"netloop.corners.{suite}", name=name, time=f"{r['seconds']:.3f}")
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
    v = [verdict(r) for r in run.records]
    corners = [{"label": r["corner"], "verdict": verdict(r), "error": r["error"], "loop": r["loop"],
                **{k: r[k] for k in ("at", "netlist", "settings", "key", "seconds", "sim_seconds", "worker", "simulator_output")}}
               for r in worst_first(run.records)]
    return {
        "schema": SCHEMA,
        "plan": run.plan,
        "results_file": run.results_path,
        "ran": run.ran,
        "skipped": run.skipped,
        "corners": corners,
        "counts": {k: v.count(k) for k in ("error", "unstable", "fail", "pass")},
        "passed": run.passed,
    }
