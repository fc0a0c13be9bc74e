"""The sensitivity section of the HTML report: the chart, the ranked table, the what-ifs; then the measured loop's own page."""

from __future__ import annotations

import math
from pathlib import Path

from netloop.jobs.sensitivity.records import FIGURES, SensitivityRun, WhatIf
from netloop.report.files import output_file
from netloop.report.html import page_template, png_uri, render_html
from netloop.report.notation import db, deg, eng
from netloop.report.sensitivity_plot import sensitivity_figure
from netloop.report.sensitivity_text import (
    FIGURE_NAMES,
    accuracy_text,
    knob_value,
    reload_text,
    slope_text,
)

__all__ = ["render_sensitivity_html", "sensitivity_section", "write_sensitivity_html"]

TEMPLATE = "sensitivity_section.html.j2"


def _cell(text: str, cls: str = "num") -> dict:
    return {"text": text, "cls": cls}


def _what_if(w: WhatIf) -> dict:
    found = "none" if w.solved_value is None else f"{knob_value(w.solved_value, w.knob.unit)} (x{w.factor:.6g})"
    check, outcome, cls = w.answer, "not reachable" if w.solved_value is None else "", "bad" if w.solved_value is None else ""
    if w.check is not None:
        m = w.check.analysis.margins
        check = (f"PM {deg(m.phase_margin_deg)} at {eng(m.unity_gain_hz, 'Hz')}, GM {db(m.gain_margin_db)}, "
                 f"peaking {db(w.check.analysis.peaking.peak_db)}")
        outcome, cls = ("meets it", "ok") if w.confirmed else ("does NOT meet it", "bad")
    return {
        "requirement": w.requirement,
        "knob": w.knob.name,
        "now": knob_value(w.value, w.knob.unit),
        "found": found,
        "check": check,
        "outcome": outcome,
        "cls": cls,
        "card": w.edited or "",
        "where": f"{w.knob.location.file}:{w.knob.location.line}",
    }


def sensitivity_section(run: SensitivityRun) -> str:
    """The section's HTML (escaped; for netloop.report.html.render_html's ``sections``)."""
    what_for = tuple(dict.fromkeys(w.requirement for w in run.what_ifs))
    solved = {(w.requirement, w.knob): w for w in run.what_ifs}
    rows = []
    for i, s in enumerate(run.sensitivities):
        cells = [_cell(str(i + 1)), _cell(s.knob.name, ""), _cell(s.knob.quantity, ""), _cell(knob_value(s.value, s.knob.unit))]
        cells += [_cell(f"({s.problem})", "none")] * len(FIGURES) if s.problem else [_cell(slope_text(f, s.slope(f))) for f in FIGURES]
        for r in what_for:
            w = solved.get((r, s.knob))
            cells.append(_cell("" if w is None else (knob_value(w.solved_value, w.knob.unit) if w.solved_value is not None else "none in range")))
        rows.append(cells)
    context = {
        "withheld": run.withheld,
        "intro": (f"{len(run.sensitivities)} knob(s), each changed by about ±{100 * math.expm1(run.step):.3g} % and "
                  f"±{100 * math.expm1(2 * run.step):.3g} % on the loaded circuit (only the frequencies near the "
                  "crossovers re-simulated); each slope is the change of the figure per decade of the value, by central differences."
                  + (f" {reload_text(run)}." if reload_text(run) else "")),
        "chart": png_uri(sensitivity_figure(run)) if run.sensitivities else "",
        "chart_alt": f"ranking of the knobs by {FIGURE_NAMES[run.rank_by]}",
        "rank_name": FIGURE_NAMES[run.rank_by],
        "table_head": ["rank", "knob", "what", "value", *(f"{FIGURE_NAMES[f]} ({FIGURES[f][2]})" for f in FIGURES), *(f"what-if {r}" for r in what_for)],
        "table_rows": rows,
        "accuracy": accuracy_text(run) if run.sensitivities else "",
        "what_if_intro": (f"Each value was searched from {run.what_ifs[0].span[0]:g}x to {run.what_ifs[0].span[1]:g}x of the measured one, "
                          "then measured afresh with it written into a copy of the netlist.") if run.what_ifs else "",
        "what_ifs": [_what_if(w) for w in run.what_ifs],
        "caution": run.caution,
    }
    return page_template(TEMPLATE).render(**context)


def render_sensitivity_html(run: SensitivityRun) -> str:
    """The whole page: the sensitivity section, then the measured loop as `netloop check --report` shows it."""
    n = run.nominal
    return render_html(n, title=f"netloop sensitivity: {Path(n.netlist).name}, loop broken at {n.breaks.node}", sections=[sensitivity_section(run)])


def write_sensitivity_html(run: SensitivityRun, path: str | Path) -> Path:
    """Write the page to ``path`` (UTF-8); returns the path."""
    page = render_sensitivity_html(run)
    with output_file(path, "HTML report") as out:
        out.write_text(page, encoding="utf-8")
    return out
