"""The HTML report: one self-contained page (inline CSS, plots as PNG data URIs, no external files or links).

The page is templates/report.html.j2 (jinja2, StrictUndefined, autoescaped); every number is
formatted here, the template only loops and substitutes.
"""

from __future__ import annotations

import base64
import re
from collections.abc import Iterable, Sequence
from pathlib import Path

from netloop.jobs.loop_result import LoopResult, combined_verdict
from netloop.report.bode_plot import bode_figure, verdict_title
from netloop.report.figure import as_results, loop_name, render
from netloop.report.files import output_file
from netloop.report.notation import NONE, db, deg, eng
from netloop.report.text import load_side
from netloop.report.phrases import closed_loop_phrases, low_gain_phrase, margin_phrases, nyquist_phrase, phase_crossover_margin
from netloop.report.nyquist_plot import nyquist_figure
from netloop.report.text import format_text, requirement_status, requirement_text, verdict_line

__all__ = ["TEMPLATE_DIR", "page_template", "png_uri", "render_html", "write_html"]

TEMPLATE_DIR = Path(__file__).resolve().parent.parent / "templates"
TEMPLATE = "report.html.j2"


def _environment():
    import jinja2  # noqa: PLC0415 - lazy, like matplotlib

    return jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(TEMPLATE_DIR)),
        undefined=jinja2.StrictUndefined,
        autoescape=True,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )


def page_template(name: str):
    """A template of templates/ in the report's environment (autoescaped, StrictUndefined)."""
    return _environment().get_template(name)


def png_uri(fig) -> str:
    """A figure as a PNG data URI, for a self-contained page."""
    return "data:image/png;base64," + base64.b64encode(render(fig, "png")).decode("ascii")


def _kv(label: str, value: str, cls: str = "") -> dict:
    return {"label": label, "value": value, "cls": cls}


def _cell(text: str, cls: str = "num") -> dict:
    return {"text": text, "cls": cls, "link": ""}


def _anchor(index: int, result: LoopResult) -> str:
    slug = re.sub(r"[^a-z0-9]+", "-", f"{result.label or result.breaks.node}".lower()).strip("-")
    return f"loop-{index}-{slug}" if slug else f"loop-{index}"


_CLASSIFICATION_CLASS = {"stable": "ok", "unstable": "bad", "does not regulate": "warn", "inconclusive": "warn"}


def _verdict_class(r: LoopResult) -> str:
    """The banner's colour: "pass" (green) only for a PASS that needs no note; "note" (amber) for a PASS of a loop
    that does not regulate or is below common practice; "fail" (red); "inconclusive" (grey)."""
    if r.verdict == "pass" and (not r.analysis.regulates or r.below_common_practice):
        return "note"
    return r.verdict


def _summary(r: LoopResult) -> list[dict]:
    a = r.analysis
    pm = a.margins.phase_margin_deg
    classes = {"worst phase margin": "" if pm is None else ("ok" if pm > 0 else "bad")}
    rows = [
        _kv("classification", a.classification, _CLASSIFICATION_CLASS[a.classification]),
        _kv(*low_gain_phrase(a)),
    ]
    return rows + [_kv(label, value, classes.get(label, "")) for label, value in margin_phrases(a)]


def _gain_rows(r: LoopResult) -> list[list[dict]]:
    rows = []
    for c in r.analysis.gain_crossovers:
        rows.append([
            _cell(eng(c.freq_hz, "Hz")),
            _cell(c.direction, ""),
            _cell(deg(c.phase_deg)),
            _cell(deg(c.phase_margin_deg), "num " + ("ok" if c.phase_margin_deg > 0 else "bad")),
            _cell(db(c.peaking_db)),
            _cell(eng(c.delay_margin_s, "s") if c.delay_margin_s is not None else NONE),
        ])
    return rows


def _phase_rows(r: LoopResult) -> list[list[dict]]:
    rows = []
    for c in r.analysis.phase_crossovers:
        rows.append([
            _cell("DC" if c.freq_hz == 0 else eng(c.freq_hz, "Hz")),
            _cell(c.kind, ""),
            _cell(f"{c.phase_deg:.0f} deg"),
            _cell(db(c.gain_db)),
            _cell(phase_crossover_margin(c, r.analysis.stable)),
        ])
    return rows


def _closed_loop(r: LoopResult) -> list[dict]:
    a = r.analysis
    n = a.nyquist
    rows = [_kv(label, value, "estimate" if "estimate" in f"{label} {value}".lower() else "") for label, value in closed_loop_phrases(a)]
    rows.append(_kv("Nyquist", nyquist_phrase(a), "ok" if n.stable else "bad"))
    if not n.reliable:
        rows.append(_kv("Nyquist count doubtful", " ".join(n.reasons) or "the data cannot support the count", "bad"))
    return rows


def _breaks(r: LoopResult) -> list[dict]:
    b = r.breaks
    rows = [
        _kv("netlist", r.netlist),
        _kv("node", b.node),
        _kv("method", r.method),
        _kv("driver side", f"{b.side_a}: {', '.join(b.driver_terminals) or NONE}"),
        _kv("load side", f"{b.side_b}: {load_side(b)}"),
    ]
    if b.shunt_terminals:
        rows.append(_kv("shunt only (either side)", ", ".join(b.shunt_terminals)))
    rows.append(_kv("decided by", b.decided_by or NONE))
    if b.silenced_sources:
        rows.append(_kv("silenced sources", ", ".join(b.silenced_sources) + " (AC magnitude 0 in the probe deck)"))
    if b.copied_subcircuits:
        rows.append(_kv("copied subcircuits", ", ".join(f"{o} -> {c}" for o, c in b.copied_subcircuits)))
    return rows


def _simulation(r: LoopResult) -> list[dict]:
    s = r.sim
    return [
        _kv("backend", s.backend + (f", {s.processes} processes side by side" if s.processes > 1 else "")),
        _kv("frequency points", str(s.points)),
        _kv("refinement", f"{s.refinement_rounds} round(s); " + ("phase margin settled" if s.refined else "phase margin NOT settled"),
            "" if s.refined else "bad"),
        _kv("convergence aid", s.convergence_aid or "none needed"),
        _kv("probe deck", s.deck_path or "not kept"),
        _kv("simulation time", f"{s.seconds:.2f} s"),
    ]


def _loop(index: int, r: LoopResult, results: Sequence[LoopResult], plots: bool) -> dict:
    a = r.analysis
    heading = f"{loop_name(r, results)}: {Path(r.netlist).name}" if len(results) > 1 else f"Loop broken at {r.breaks.node}"
    ignored = a.ignored_phase_crossovers
    return {
        "anchor": _anchor(index, r),
        "heading": heading,
        "verdict": verdict_line(r),
        "verdict_class": _verdict_class(r),
        "summary": _summary(r),
        "plots": [
            {"uri": png_uri(bode_figure(r)), "alt": f"Bode plot of the loop broken at {r.breaks.node}"},
            {"uri": png_uri(nyquist_figure(r)), "alt": f"Nyquist plot of the loop broken at {r.breaks.node}"},
        ] if plots else [],
        "gain_head": ["frequency", "direction", "phase", "phase margin", "|T/(1+T)| there", "delay margin"],
        "gain_rows": _gain_rows(r),
        "no_gain": "None: the loop gain never reaches 0 dB (the loop does not regulate)." if not a.regulates
        else "None inside the sweep.",
        "phase_head": ["frequency", "kind", "phase", "|T|", "margin"],
        "phase_rows": _phase_rows(r),
        "ignored_note": (f"{len(ignored)} phase crossover(s) below the numerical floor ({db(a.floor_db)}) ignored: the phase is noise there."
                         if ignored else ""),
        "closed_loop": _closed_loop(r),
        "requirements": [
            {"text": o.requirement.text, "status": (status := requirement_status(r, o)),
             "cls": {"PASS": "ok", "FAIL": "bad"}.get(status, "warn"),
             "detail": requirement_text(o)}
            for o in r.requirements
        ],
        "breaks": _breaks(r),
        "warnings": list(r.warnings),
        "ignored_statements": list(r.ignored_statements),
        "simulation": _simulation(r),
        "text": format_text(r),
    }


def _overview(results: Sequence[LoopResult], plots: bool) -> dict:
    rows = []
    for i, r in enumerate(results):
        m = r.analysis.margins
        first = _cell(loop_name(r, results), "")
        first["link"] = _anchor(i, r)
        rows.append({"cells": [
            first,
            _cell(r.verdict.upper(), {"pass": "ok", "fail": "bad"}.get(r.verdict, "warn")),
            _cell(r.analysis.classification, ""),
            _cell(deg(m.phase_margin_deg)),
            _cell(eng(m.unity_gain_hz, "Hz")),
            _cell(db(m.gain_margin_db)),
            _cell(db(m.lower_gain_margin_db)),
            _cell(f"{m.modulus_margin:.3f}"),
        ]})
    passed = sum(r.passed for r in results)
    verdict = combined_verdict(r.verdict for r in results)
    return {
        "head": ["loop", "verdict", "classification", "phase margin", "crossover", "gain margin", "lower GM", "min |1+T|"],
        "rows": rows,
        "verdict": f"{verdict.upper()}: {passed} of {len(results)} loop(s) pass"
                   + "".join(f", {n} {v}" for v in ("fail", "inconclusive") if (n := sum(r.verdict == v for r in results))),
        "verdict_class": verdict,
        "plots": [
            {"uri": png_uri(bode_figure(results)), "alt": "Bode plots of all loops"},
            {"uri": png_uri(nyquist_figure(results)), "alt": "Nyquist plots of all loops"},
        ] if plots else [],
    }


def render_html(results: LoopResult | Iterable[LoopResult], *, title: str | None = None, plots: bool = True, sections: Sequence[str] = ()) -> str:
    """The HTML page of one loop or several (an overview with overlaid plots, then one section per loop).

    ``sections``: HTML of other jobs' sections (already rendered and escaped), placed before the loops.
    """
    rs = as_results(results)
    netlists = sorted({r.netlist for r in rs})
    if title is None:
        title = f"netloop: {', '.join(Path(n).name for n in netlists)}"
    subtitle = (verdict_title(rs[0]) + f", loop broken at {rs[0].breaks.node} ({rs[0].method} probe)") if len(rs) == 1 else f"{len(rs)} loops"
    context = {
        "title": title,
        "subtitle": f"{subtitle}; netlist {', '.join(netlists)}",
        "overview": _overview(rs, plots) if len(rs) > 1 else None,
        "loops": [_loop(i, r, rs, plots) for i, r in enumerate(rs)],
        "caution": rs[0].caution,
        "sections": [_markup(section) for section in sections],
    }
    return _environment().get_template(TEMPLATE).render(**context)


def _markup(html: str):
    from markupsafe import Markup  # noqa: PLC0415 - jinja2's own dependency, loaded with it

    return Markup(html)


def write_html(results: LoopResult | Iterable[LoopResult], path: str | Path, *, title: str | None = None) -> Path:
    """Write the self-contained HTML report of one loop or several to path (UTF-8); returns the path."""
    page = render_html(results, title=title)
    with output_file(path, "HTML report") as out:
        out.write_text(page, encoding="utf-8")
    return out
