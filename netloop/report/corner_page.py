"""The HTML report of a corner run: one self-contained page (netloop.report.html's page, with sections of its own).

The page holds: the run's verdict and counts; the comparison with a baseline, when there is one; the corner
table worst first, each corner's details on demand (a <details> element per corner, opened from the table);
the maps over the numeric axes with the boundaries in words; then the worst corners (up to WORST) as
`netloop check --report` shows loops: Bode and Nyquist plots overlaid, and each corner's own section.
The worst corners' plots are drawn from the loop documents in the records (netloop.jobs.document_read).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path

from netloop.analysis.requirements import Requirement
from netloop.jobs.document_read import result_from_document
from netloop.jobs.loop_result import CAUTION
from netloop.jobs.runs.baseline import BaselineComparison
from netloop.jobs.runs.figures import MAP_FIGURES, figure_value
from netloop.report import corner_records as cr
from netloop.report.baseline import change_cells, ordered_changes, regression_sentence, summary_line
from netloop.report.boundaries import METHOD, boundary_sentences
from netloop.report.files import output_file
from netloop.report.html import page_template, png_uri, render_html
from netloop.report.maps import map_figures
from netloop.report.notation import NONE, db, deg, eng

__all__ = ["WORST", "corner_sections", "render_corner_html", "write_corner_html"]

WORST = 4
"""How many of the worst measured corners get Bode and Nyquist plots and a section of their own."""

TEMPLATE = "corners_section.html.j2"
_CLASS = {"pass": "ok", "fail": "bad", "unstable": "bad", "error": "bad", "inconclusive": "warn"}


def _cell(text: str, cls: str = "num") -> dict:
    return {"text": text, "cls": cls}


def _anchor(i: int) -> str:
    return f"corner-{i + 1}"


def _details(i: int, r: dict, several: bool) -> dict:
    v = cr.verdict(r)
    loop = r.get("loop") or {}
    m = loop.get("margins") or {}
    rows = [{"label": k, "value": str(val), "cls": ""} for k, val in (r.get("settings") or {}).items()]
    if several or r.get("at"):
        rows.append({"label": "break node", "value": r.get("at") or NONE, "cls": ""})
    if loop:
        rows += [
            {"label": "phase margin", "value": f"{deg(m.get('phase_margin_deg'))} at {eng(m.get('unity_gain_hz'), 'Hz')}", "cls": "num"},
            {"label": "gain margin", "value": cr.gain_margin_text(r), "cls": "num"},
            {"label": "lower gain margin", "value": db(m.get("lower_gain_margin_db")), "cls": "num"},
            {"label": "modulus margin", "value": "-" if m.get("modulus_margin") is None else f"{m['modulus_margin']:.3f}", "cls": "num"},
            {"label": "delay margin", "value": eng(m.get("delay_margin_s"), "s"), "cls": "num"},
            {"label": "closed-loop peaking", "value": db(figure_value(r, "peak")), "cls": "num"},
            {"label": "DC loop gain", "value": db(figure_value(r, "dc")), "cls": "num"},
            {"label": "Nyquist count", "value": f"{(loop.get('stability') or {}).get('closed_loop_rhp_poles')} closed-loop pole(s) in the RHP", "cls": ""},
        ]
        for q in loop.get("requirements", ()):
            rows.append({"label": f"requirement {q['text']}", "value": q["reason"], "cls": "ok" if q["passed"] else "bad"})
        for c in loop.get("checks", ()):
            rows.append({"label": f"self-check {c['name']}", "value": c["detail"] + ("" if c["passed"] else f"; try: {c['advice']}"),
                         "cls": "" if c["passed"] else "warn"})
    rows.append({"label": "time", "value": f"{r.get('seconds', 0.0):.2f} s (simulation {r.get('sim_seconds', 0.0):.2f} s)", "cls": ""})
    if r.get("netlist"):
        rows.append({"label": "netlist", "value": r["netlist"], "cls": ""})
    line = f"phase margin {deg(m.get('phase_margin_deg'))}, crossover {eng(m.get('unity_gain_hz'), 'Hz')}" if loop else ""
    reasons = [] if v == "pass" else cr.reasons(r)
    name = f"{r['corner']} at {r['at']}" if several and r.get("at") else r["corner"]
    return {"anchor": _anchor(i), "name": name, "verdict": v.upper(), "cls": _CLASS[v], "line": line, "rows": rows,
            "reasons": [*reasons, *cr.notes(r)], "output": r.get("simulator_output") or ""}


def _baseline(cmp: BaselineComparison) -> dict:
    several = len({c.at for c in cmp.changes if c.at}) > 1
    head = ["corner", *(["at"] if several else []), "phase margin", "gain margin", "crossover", "peaking", "note"]
    rows = []
    for c in ordered_changes(cmp):
        note = "; ".join(f"regression: {r.metric}" for r in c.regressions) or c.not_compared or ""
        rows.append([_cell(c.corner, ""), *([_cell(c.at, "")] if several else []), *(_cell(x) for x in change_cells(c)),
                     _cell(note, "bad" if c.regressions else "none")])
    notes = [f"New (not in the baseline): {', '.join(k for k, _ in cmp.new)}"] if cmp.new else []
    notes += [f"Vanished (in the baseline, not in this run): {', '.join(k for k, _ in cmp.vanished)}"] if cmp.vanished else []
    return {"summary": summary_line(cmp), "regressions": [regression_sentence(r, several_nodes=several) for r in cmp.regressions],
            "head": head, "rows": rows, "notes": notes}


def _verdict_line(verdict: str, records: tuple[dict, ...], comparison: BaselineComparison | None) -> str:
    """"FAIL: 1 regression against the baseline; 2 corners fail a requirement" and the like."""
    n = cr.verdict_counts(records)
    parts = [f"{n[v]} {what}" for v, what in (("error", "not measured"), ("unstable", "unstable"), ("fail", "fail a requirement"),
                                             ("inconclusive", "inconclusive (no verdict)")) if n[v]]
    if comparison is not None and comparison.regressions:
        k = len(comparison.regressions)
        parts.insert(0, f"{k} regression{'s' if k != 1 else ''} against the baseline")
    if not parts:
        return f"{verdict.upper()}: every corner passes" + (" and none regressed against the baseline" if comparison else "")
    return f"{verdict.upper()}: " + "; ".join(parts) + ("" if any(n[v] for v in ("error", "unstable", "fail")) else
                                                     "; every corner meets its requirements")


def corner_sections(records: tuple[dict, ...], *, verdict: str, plan: str = "", results_file: str = "",
                    requirements: Sequence[Requirement] = (), units: dict[str, str] | None = None,
                    comparison: BaselineComparison | None = None, worst: Sequence[str] = ()) -> str:
    """The corner run's own sections (escaped HTML, for render_html's ``sections``)."""
    several = len({r["at"] for r in records if r.get("at")}) > 1
    ordered = cr.worst_first(records)
    head = ["corner", *(["at"] if several else []), "phase margin", "gain margin", "crossover", "peaking", "verdict", "note"]
    rows = []
    for i, r in enumerate(ordered):
        v = cr.verdict(r)
        m = (r.get("loop") or {}).get("margins") or {}
        cells = [_cell(r["corner"], ""), *([_cell(r["at"], "")] if several else []), _cell(deg(m.get("phase_margin_deg"))),
                 _cell(cr.gain_margin_text(r)), _cell(eng(m.get("unity_gain_hz"), "Hz")), _cell(db(figure_value(r, "peak")) if r.get("loop") else NONE),
                 _cell(v, _CLASS[v]), _cell(cr.table_note(r), "")]
        rows.append({"anchor": _anchor(i), "cells": cells})
    maps = [{"uri": png_uri(fig), "alt": alt} for _, alt, fig in map_figures(records, requirements, units)]
    groups = [{"head": head_, "sentences": s} for head_, s in boundary_sentences(records, requirements, units)]
    about = [{"label": "plan", "value": plan or NONE}, {"label": "results file", "value": results_file or NONE},
             {"label": "requirements", "value": ", ".join(q.text for q in requirements) or "none"},
             {"label": "figures mapped", "value": ", ".join(MAP_FIGURES)}]
    context = {
        "verdict": _verdict_line(verdict, records, comparison),
        "verdict_class": verdict,
        "counts": cr.counts_line(records),
        "about": about,
        "baseline": _baseline(comparison) if comparison is not None else None,
        "head": head,
        "rows": rows,
        "details": [_details(i, r, several) for i, r in enumerate(ordered)],
        "maps": maps,
        "boundaries": groups,
        "method": METHOD,
        "worst": (f"Bode and Nyquist plots of the {len(worst)} worst measured corner(s) ({', '.join(worst)}) follow: first "
                  "overlaid, then each on its own with its margins.") if worst else "",
    }
    return page_template(TEMPLATE).render(**context)


def render_corner_html(records: tuple[dict, ...], *, verdict: str, title: str, plan: str = "", results_file: str = "",
                       requirements: Sequence[Requirement] = (), units: dict[str, str] | None = None,
                       comparison: BaselineComparison | None = None) -> str:
    """The whole page of a corner run (see the module docstring)."""
    measured = [r for r in cr.worst_first(records) if r.get("loop")][:WORST]
    results = [replace(result_from_document(r["loop"]), label=r["corner"] + (f" at {r['at']}" if r.get("at") and
               len({x["at"] for x in records if x.get("at")}) > 1 else "")) for r in measured]
    sections = [corner_sections(records, verdict=verdict, plan=plan, results_file=results_file, requirements=requirements,
                                units=units, comparison=comparison, worst=[r.label for r in results])]
    if results:
        return render_html(results, title=title, sections=sections)
    from markupsafe import Markup  # noqa: PLC0415 - jinja2's own dependency

    return page_template("report.html.j2").render(title=title, subtitle=f"{len(records)} corner record(s), none measured",
                                                  overview=None, loops=[], caution=CAUTION, sections=[Markup(s) for s in sections])


def write_corner_html(records: tuple[dict, ...], path: str | Path, **kwargs) -> Path:
    """Write render_corner_html(records, **kwargs) to ``path`` (UTF-8); returns the path."""
    page = render_corner_html(records, **kwargs)
    with output_file(path, "HTML report") as out:
        out.write_text(page, encoding="utf-8")
    return out
