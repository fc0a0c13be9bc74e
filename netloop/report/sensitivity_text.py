"""The terminal summary of a sensitivity run: the loop's verdict, the ranked table of slopes, the what-ifs, the cautions."""

from __future__ import annotations

import math

from netloop.analysis.requirements import METRICS
from netloop.jobs.sensitivity.records import FIGURES, SensitivityRun, Slope, WhatIf
from netloop.report.notation import NONE, db, deg, eng, requirement_value
from netloop.report.text import verdict_line

__all__ = ["FIGURE_NAMES", "SHOWN_ROWS", "accuracy_text", "format_sensitivity_text", "knob_value", "reload_text", "slope_text", "what_if_line"]

SHOWN_ROWS = 15
"""Rows of the ranked table printed; the rest are counted (all are in --json)."""

FIGURE_NAMES = {"pm": "phase margin", "gm": "gain margin", "fc": "crossover", "peak": "peaking"}
LESS_SURE = 0.01  # a slope whose estimated error exceeds this fraction of it is named


def knob_value(value: float | None, unit: str) -> str:
    """A knob's value in engineering notation ("1.20 pF", "80.0 um", "1.50 kohm"); "-" when unknown."""
    if value is None or math.isnan(value):
        return NONE
    return eng(value, unit) if unit else f"{value:.4g}"


def reload_text(run: SensitivityRun) -> str:
    """The sentence naming the knobs whose changes were edited copies of the netlist read again, and why; "" when none."""
    reloaded = [s.knob for s in run.sensitivities if s.knob.reload]
    if not reloaded:
        return ""
    names = ", ".join(k.name for k in reloaded[:6]) + (f" and {len(reloaded) - 6} more" if len(reloaded) > 6 else "")
    one = len(reloaded) == 1
    what, them = ("is a size of a process device wrapper", "it") if one else ("are sizes of process device wrappers", "them")
    return (f"{len(reloaded)} of them ({names}) {what}: ngspice applies {them} when it reads the instance and the wrapper "
            f"derives its device's other values from {them}, so each was an edited copy of the netlist read again by ngspice "
            "(its first value a load, the others changed in the copy ngspice held)")


def slope_text(figure: str, slope: Slope) -> str:
    """A slope with its sign, in its figure's unit per decade ("+69.45", "-7.54 MHz")."""
    v = slope.per_decade
    if v is None:
        return NONE
    if figure == "fc":
        text = eng(v, "Hz")
    else:
        text = f"{v:.2f}" if abs(v) >= 0.01 or v == 0 else f"{v:.2g}"
    return text if text.startswith("-") else "+" + text


def _table(run: SensitivityRun, what_for: tuple[str, ...]) -> list[str]:
    head = ["rank", "knob", "value", *(FIGURE_NAMES[f] for f in FIGURES), *(f"what-if {r}" for r in what_for)]
    units = ["", "", "", *(FIGURES[f][2] for f in FIGURES), *("" for _ in what_for)]
    solved = {(w.requirement, w.knob): w for w in run.what_ifs}
    rows = []
    for i, s in enumerate(run.sensitivities[:SHOWN_ROWS]):
        cells = [str(i + 1), s.knob.name, knob_value(s.value, s.knob.unit)]
        if s.problem:
            cells += [f"({s.problem})", "", "", ""]
        else:
            cells += [slope_text(f, s.slope(f)) for f in FIGURES]
        for r in what_for:
            w = solved.get((r, s.knob))
            cells.append("" if w is None else (f"{knob_value(w.solved_value, w.knob.unit)} (x{w.factor:.4g})" if w.solved_value is not None else "none in range"))
        rows.append(cells)
    widths = [max(len(str(c)) for c in col) for col in zip(head, units, *rows, strict=False)]
    right = {0, 3, 4, 5, 6}

    def line(cells: list[str]) -> str:
        out = []
        for j, (c, w) in enumerate(zip(cells, widths, strict=False)):
            out.append(c.rjust(w) if j in right and c and not c.startswith("(") else c.ljust(w))
        return "  ".join(out).rstrip()

    lines = [line(head), line(units), *(line(r) for r in rows)]
    rest = len(run.sensitivities) - SHOWN_ROWS
    if rest > 0:
        lines.append(f"... and {rest} more (every knob is in --json)")
    return lines


def accuracy_text(run: SensitivityRun) -> str:
    shown = [s for s in run.sensitivities if not s.problem]
    doubtful = []
    for s in shown:
        for f in FIGURES:
            rel = s.slope(f).relative_error
            if rel is not None and rel > LESS_SURE:
                doubtful.append(f"{s.knob.name} {FIGURE_NAMES[f]} ({100 * rel:.2g} %)" if math.isfinite(rel) else f"{s.knob.name} {FIGURE_NAMES[f]} (slope 0)")
    worst = max((s.slope(f).relative_error or 0.0 for s in shown for f in FIGURES if math.isfinite(s.slope(f).relative_error or 0.0)), default=0.0)
    text = f"estimated error of each slope: at most {100 * worst:.2g} % of it (from the steps h and 2h)"
    if doubtful:
        text += f"; less sure (above {100 * LESS_SURE:g} %): {', '.join(doubtful[:6])}" + (f" and {len(doubtful) - 6} more" if len(doubtful) > 6 else "")
    return text


def what_if_line(w: WhatIf) -> list[str]:
    """The what-if in words: the value found and the fresh check at it, or why there is none."""
    lead = f"  {w.requirement:<10} {w.knob.name}: "
    if w.solved_value is None:
        return [lead + w.answer]
    change = f"{knob_value(w.value, w.knob.unit)} -> {knob_value(w.solved_value, w.knob.unit)} (x{w.factor:.6g})"
    kind = "may move to" if w.met_at_value else "needs"
    lines = [lead + f"{kind} {change}" + ("" if w.monotonic else " (the figure did not move one way over the values tried)")]
    c = w.check
    if c is not None:
        m = c.analysis.margins
        name, unit = METRICS[next(iter(o.requirement.metric for o in c.requirements), "pm")]
        met = all(o.passed for o in c.requirements)
        value = next((o.value for o in c.requirements), None)
        lines.append(
            f"  {'':<10} measured afresh with it: PM {deg(m.phase_margin_deg)} at {eng(m.unity_gain_hz, 'Hz')}, GM {db(m.gain_margin_db)}, "
            f"peaking {db(c.analysis.peaking.peak_db)}; {name} {requirement_value(unit, value)}: {'meets' if met else 'does NOT meet'} {w.requirement}"
        )
    if w.edited:
        lines.append(f"  {'':<10} card: {w.edited}   ({w.knob.location.file}:{w.knob.location.line})")
    return lines


def format_sensitivity_text(run: SensitivityRun) -> str:
    """The terminal summary of a sensitivity run (plain text; the loop's verdict first, the cautions last)."""
    n = run.nominal
    lines = [verdict_line(n), f"netlist: {n.netlist}, loop broken at {n.breaks.node} ({n.method} probe)"]
    if run.withheld:
        lines += [f"no sensitivities: {run.withheld}", "try: `netloop check` with the same options shows the failed self-check and what to try"]
    else:
        step = run.step
        lines.append(
            f"{len(run.sensitivities)} knob(s), each changed by x e^(+-{step:g}) and x e^(+-{2 * step:g}) "
            f"(about +-{100 * math.expm1(step):.3g} % and +-{100 * math.expm1(2 * step):.3g} %) on the loaded circuit; "
            f"slopes by central differences, d figure / d log10 value; re-simulated near the crossovers only"
            + (f"; {run.workers} worker processes" if run.workers > 1 else "")
        )
        if reload_text(run):
            lines.append(reload_text(run))
        lines.append(f"ranked by {FIGURE_NAMES[run.rank_by]} (largest slope first)")
        lines.append("")
        lines += _table(run, tuple(dict.fromkeys(w.requirement for w in run.what_ifs)))
        lines.append("")
        top = next((s for s in run.sensitivities if s.slope(run.rank_by).per_decade is not None), None)
        if top is not None:
            per = top.slope(run.rank_by).per_decade * math.log10(1.01)
            unit = FIGURES[run.rank_by][1]
            shown = eng(per, "Hz") if run.rank_by == "fc" else f"{per:+.3g} {unit}"
            lines.append(f"reading: {top.knob.name} {slope_text(run.rank_by, top.slope(run.rank_by))} {FIGURES[run.rank_by][2]} is {shown} "
                         f"of {FIGURE_NAMES[run.rank_by]} for +1 % of {top.knob.name} (a slope, true near the measured value only)")
        lines.append(accuracy_text(run))
        whole = sum(s.whole_sweeps for s in run.sensitivities)
        if whole:
            lines.append(f"{whole} changed value(s) needed a whole sweep (a crossover left its window near the measured one)")
    if run.what_ifs:
        lines.append("")
        lines.append(f"what-if: each value found with everything else held, searched from {run.what_ifs[0].span[0]:g}x to "
                     f"{run.what_ifs[0].span[1]:g}x, then measured afresh with it written into a copy of the netlist")
        for w in run.what_ifs:
            lines += what_if_line(w)
    lines.append(f"caution: {run.caution}")
    lines.append(f"caution: {n.caution}")
    return "\n".join(lines) + "\n"
