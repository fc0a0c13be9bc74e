"""Corner runs presented from their per-corner records: verdicts, worst-first order, table, counts, CSV, JUnit XML, JSON.

A record is one corner measured at one break node, as the corners stage writes it to its results
file (one JSON line): ``corner`` (name), ``at`` (break node), ``outcome`` ("pass", "fail",
"inconclusive" or "error"), ``loop`` (the loop's document, netloop.jobs.document.to_document, or null), ``error``,
``settings``, ``seconds``. A resumed run has only these records for the corners finished earlier,
and netloop.report.corners turns its LoopResult outcomes into the same records, so the verdicts
and the order below are decided in this one place.
"""

from __future__ import annotations

import csv
import math
import xml.etree.ElementTree as ET
from collections.abc import Sequence
from pathlib import Path

from netloop.jobs.document import CORNERS_SCHEMA
from netloop.report.files import output_file
from netloop.report.notation import NONE, db, deg, eng

__all__ = [
    "CORNERS_SCHEMA",
    "CSV_FIELDS",
    "VERDICTS",
    "corner_entry",
    "corner_table",
    "counts_line",
    "loads_line",
    "failed_checks",
    "failed_requirements",
    "gain_margin_text",
    "junit_xml",
    "margin",
    "notes",
    "reasons",
    "run_document",
    "table_note",
    "verdict",
    "verdict_counts",
    "worst_first",
    "worst_first_key",
    "write_corner_csv",
    "write_junit",
]

VERDICTS = ("error", "inconclusive", "unstable", "fail", "pass")
"""The verdicts, worst first:

    error         the corner could not be measured (the simulation or a stage before the analysis failed)
    inconclusive  measured, but a self-check failed: the data supports no verdict (the record says why)
    unstable      the Nyquist count says unstable
    fail          stable, but a requirement failed
    pass          stable and every requirement met (a loop that does not regulate passes, with a note)
"""


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


def failed_checks(r: dict) -> tuple[dict, ...]:
    """The self-checks a record's loop failed ({name, passed, detail, advice}); they make it inconclusive."""
    return tuple(c for c in (r.get("loop") or {}).get("checks", ()) if not c["passed"])


def notes(r: dict) -> tuple[str, ...]:
    """What a passing corner's verdict does not say by itself: "does not regulate", margins below common practice."""
    loop = r.get("loop") or {}
    if verdict(r) != "pass":
        return ()
    out = []
    if loop.get("classification") == "does not regulate":
        out.append("does not regulate (|T| < 0 dB throughout)")
    below = loop.get("below_common_practice") or ()
    if below:
        out.append("below common practice: " + ", ".join(q["text"] for q in below))
    return tuple(out)


def table_note(r: dict) -> str:
    """The table's note: why a corner is not a plain pass ("-" when it is)."""
    v = verdict(r)
    if v == "error":
        return "simulation failed" if r.get("simulator_output") else "not measured"
    if v == "inconclusive":
        return "no verdict: self-check " + ", ".join(c["name"] for c in failed_checks(r)) + " failed"
    parts = list(failed_requirements(r))
    if v == "unstable":
        parts.insert(0, f"{r['loop']['stability']['closed_loop_rhp_poles']} RHP pole(s)")
    return "; ".join([*parts, *notes(r)]) or NONE


def worst_first_key(r: dict) -> tuple[int, float]:
    """Sort key: verdict rank (error first), then phase margin, lowest first; no phase margin sorts first."""
    pm = _margins(r).get("phase_margin_deg")
    return (VERDICTS.index(verdict(r)), -math.inf if pm is None else pm)


def worst_first(records: tuple[dict, ...]) -> tuple[dict, ...]:
    """Errors, then inconclusive corners, unstable ones, failed requirements, then the rest; each group by phase
    margin, lowest first."""
    return tuple(sorted(records, key=lambda r: (*worst_first_key(r), r["corner"], r["at"])))


def _several_nodes(records) -> bool:
    """Whether the records were measured at more than one break node (a record not measured names none)."""
    return len({r["at"] for r in records if r["at"]}) > 1


def gain_margin_text(r: dict) -> str:
    """A record's gain margin as the table prints it: "12.10 dB", "inf" (no phase crossover, stable), "-" (none)."""
    if r.get("loop") is None:
        return NONE
    value = margin(r, "gain_margin_db", infinite=True)
    if value == math.inf:
        return "inf"
    return db(None if value == -math.inf else value)


def corner_table(records: tuple[dict, ...]) -> str:
    """A plain-text table, worst corner first: corner, [break node], phase margin, gain margin, crossover, verdict, note
    (failed requirements, the failed self-check, "does not regulate", ...)."""
    show_at = _several_nodes(records)
    head = ["corner", *(["at"] if show_at else []), "phase margin", "gain margin", "crossover", "verdict", "note"]
    rows = []
    for r in worst_first(records):
        m = _margins(r)
        rows.append([r["corner"], *([r["at"]] if show_at else []), deg(m.get("phase_margin_deg")), gain_margin_text(r),
                     eng(m.get("unity_gain_hz"), "Hz"), verdict(r), table_note(r)])
    widths = [max(len(str(x)) for x in col) for col in zip(head, *rows)]
    lines = ["  ".join(str(x).ljust(w) for x, w in zip(row, widths)).rstrip() for row in (head, *rows)]
    lines.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(lines)


def counts_line(records: tuple[dict, ...]) -> str:
    """"12 corners: 8 pass, 2 fail a requirement, 0 unstable, 1 inconclusive (no verdict), 1 error (not measured)"."""
    n = verdict_counts(records)
    parts = [f"{n['pass']} pass", f"{n['fail']} fail a requirement", f"{n['unstable']} unstable",
             f"{n['inconclusive']} inconclusive (no verdict)", f"{n['error']} error (not measured)"]
    corners, nodes = len({r["corner"] for r in records}), len({r["at"] for r in records if r["at"]})
    if _several_nodes(records):
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
        line += (f"; {shared} ran on a circuit another corner had loaded, with its temperature, supplies, parameters or element values "
                 "changed in place (share_loads)")
    return line


def reasons(r: dict) -> list[str]:
    """Why a corner is not a pass, one sentence each: the error, the failed self-checks with what to try, instability,
    the failed requirements' reasons."""
    v = verdict(r)
    if v == "error":
        return [r.get("error") or "not measured"]
    if v == "inconclusive":
        return [f"no verdict: {c['detail']}; try: {c['advice']}" for c in failed_checks(r)]
    out = [q["reason"] for q in r["loop"]["requirements"] if not q["passed"]]
    if v == "unstable":
        out.insert(0, f"the loop is unstable: {r['loop']['stability']['closed_loop_rhp_poles']} closed-loop pole(s) "
                      "in the right half plane by the Nyquist count")
    return out


CSV_FIELDS = ("corner", "at", "verdict", "phase_margin_deg", "unity_gain_hz", "gain_margin_db", "phase_crossover_hz",
              "lower_gain_margin_db", "modulus_margin", "delay_margin_s", "dc_loop_gain_db", "closed_loop_rhp_poles",
              "failed_requirements", "failed_checks", "notes", "error", "seconds", "settings")
"""Columns of write_corner_csv. An empty cell means the quantity does not exist (or the corner was not measured)."""


def _csv_row(r: dict) -> list[str]:
    loop = r.get("loop") or {}

    def num(value) -> str:
        return "" if value is None else repr(float(value))

    dc = loop.get("dc_loop_gain_db")
    if dc is None and (loop.get("infinite") or {}).get("dc_loop_gain_db") in ("+inf", "-inf"):
        dc = float(loop["infinite"]["dc_loop_gain_db"])
    rhp = (loop.get("stability") or {}).get("closed_loop_rhp_poles")
    return [r["corner"], r["at"], verdict(r),
            *(num(margin(r, k, infinite=True)) for k in CSV_FIELDS[3:10]),
            num(dc), "" if rhp is None else str(rhp),
            "; ".join(failed_requirements(r)), "; ".join(c["name"] for c in failed_checks(r)), "; ".join(notes(r)),
            r.get("error") or "", f"{r.get('seconds', 0.0):.3f}",
            " ".join(f"{k}={v}" for k, v in (r.get("settings") or {}).items())]


def write_corner_csv(records: tuple[dict, ...], path: str | Path) -> Path:
    """One row per corner (worst first, columns CSV_FIELDS); empty cells where a quantity does not exist; settings as k=v pairs."""
    with output_file(path, "corner table") as out, out.open("w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(CSV_FIELDS)
        w.writerows(_csv_row(r) for r in worst_first(records))
    return out


_PROPERTIES = ("phase_margin_deg", "unity_gain_hz", "gain_margin_db", "lower_gain_margin_db", "modulus_margin", "delay_margin_s")


def junit_xml(records: tuple[dict, ...], suite: str, more: Sequence[ET.Element] = ()) -> str:
    """JUnit XML (a string with an XML declaration): one test case per corner (and break node).

        <testsuites tests= failures= errors= time=>
          <testsuite name=SUITE tests= failures= errors= skipped="0" time=>
            <testcase classname=netloop.corners.SUITE name=CORNER time=SECONDS>
              <properties><property name="phase_margin_deg" value=.../> ...</properties>  the margins that exist
              <failure type="unstable"|"requirement"|"inconclusive" message=...>reasons</failure>
              <error type="simulation" message=...>ngspice's output or the error</error>
              <system-out>the margins, notes and settings</system-out>

    ``more``: further <testsuite> elements (a run against its baseline: netloop.report.baseline.regression_suite),
    added after the corners' suite and counted in <testsuites>.

    An unstable corner or a failed requirement is a failure; an inconclusive corner is a failure too (type
    "inconclusive", with the failed self-check and what to try): CI must not go green on a measurement that
    supports no verdict, and it is not an error because the corner was simulated. A corner that could not be
    measured is an error. Nothing is skipped.
    """
    n = verdict_counts(records)
    counts = {"tests": str(len(records)), "failures": str(n["fail"] + n["unstable"] + n["inconclusive"]), "errors": str(n["error"])}
    total = f"{sum(r.get('seconds', 0.0) for r in records):.3f}"
    root = ET.Element("testsuites", name=suite, **counts, time=total)
    ts = ET.SubElement(root, "testsuite", name=suite, **counts, skipped="0", time=total)
    several = _several_nodes(records)
    for r in records:
        v = verdict(r)
        name = f"{r['corner']} at {r['at']}" if several and r["at"] else r["corner"]
        tc = ET.SubElement(ts, "testcase", classname=f"netloop.corners.{suite}", name=name, time=f"{r.get('seconds', 0.0):.3f}")
        m = _margins(r)
        present = [(k, m.get(k)) for k in _PROPERTIES if m.get(k) is not None]
        if present:
            props = ET.SubElement(tc, "properties")
            for k, value in present:
                ET.SubElement(props, "property", name=k, value=repr(float(value)))
        why = reasons(r)
        if v == "error":
            el = ET.SubElement(tc, "error", message=why[0].splitlines()[0][:500] if why[0] else "", type="simulation")
            el.text = r.get("simulator_output") or why[0]
        elif v != "pass":
            el = ET.SubElement(tc, "failure", message="; ".join(why)[:500], type={"fail": "requirement"}.get(v, v))
            el.text = "\n".join(why)
        out = ET.SubElement(tc, "system-out")
        out.text = "; ".join([f"{v.upper()}: phase margin {deg(m.get('phase_margin_deg'))}, gain margin {gain_margin_text(r)}, "
                              f"crossover {eng(m.get('unity_gain_hz'), 'Hz')}", *notes(r),
                              " ".join(f"{k}={val}" for k, val in (r.get("settings") or {}).items())]).rstrip("; ")
    for extra in more:
        root.append(extra)
        for key in ("tests", "failures", "errors"):
            root.set(key, str(int(root.get(key)) + int(extra.get(key, "0"))))
    ET.indent(root)
    return ET.tostring(root, encoding="unicode", xml_declaration=True) + "\n"


def write_junit(records: tuple[dict, ...], path: str | Path, suite: str, more: Sequence[ET.Element] = ()) -> Path:
    """Write junit_xml(records, suite, more) to path (UTF-8); returns the path."""
    with output_file(path, "JUnit XML") as target:
        target.write_text(junit_xml(records, suite, more), encoding="utf-8")
    return target


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
        "verdict": run.verdict,
        "passed": run.passed,
    }
