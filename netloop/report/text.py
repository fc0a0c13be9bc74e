"""The compact terminal summary of one loop: the verdict first, then every figure a designer checks."""

from __future__ import annotations

import re
import textwrap

from netloop.analysis.requirements import METRICS, RequirementOutcome
from netloop.analysis.results import LoopAnalysis
from netloop.jobs.loop_result import BreakInfo, LoopResult
from netloop.report.notation import NONE, db, deg, eng, requirement_value
from netloop.report.phrases import (
    closed_loop_phrases,
    low_gain_phrase,
    margin_phrases,
    nyquist_phrase,
    phase_crossover_margin,
    practice_phrase,
    regulation_phrase,
)

__all__ = ["format_text", "load_side", "requirement_status", "requirement_text", "verdict_line"]

_WIDTH = 30  # label column
_LINE = 120  # wrap values beyond this many columns
_SHOWN_STATEMENTS = 3


def _row(label: str, value: str) -> str:
    """A label column and its value, long values wrapped under the value column."""
    lines = textwrap.wrap(value, _LINE - _WIDTH, break_on_hyphens=False) or [""]
    return "\n".join([f"{label:<{_WIDTH}}{lines[0]}", *(" " * _WIDTH + line for line in lines[1:])]).rstrip()


def verdict_line(result: LoopResult) -> str:
    """One line, PASS, FAIL or INCONCLUSIVE first: the classification and the reason in a few words, then what
    a PASS does not say by itself (a loop that does not regulate, margins below common practice)."""
    a = result.analysis
    m = a.margins
    failed = result.failed_requirements
    doubts = result.failed_checks
    if doubts:
        more = f" (and {len(doubts) - 1} more check(s), below)" if len(doubts) > 1 else ""
        return f"INCONCLUSIVE  the data supports no verdict: {doubts[0].detail}{more}; try: {doubts[0].advice}"
    word = "PASS" if result.passed else "FAIL"
    if not a.stable:
        z = a.nyquist.closed_loop_rhp_poles
        why = f"unstable: {z} closed-loop pole(s) in the right half plane by the Nyquist count"
    elif not a.regulates:
        why = f"stable but {regulation_phrase(a, advise=not result.requirements)}"
    elif m.phase_margin_deg is None:
        why = "stable by the Nyquist count; no gain crossover in the sweep"
    else:
        why = f"stable: worst phase margin {deg(m.phase_margin_deg)} at {eng(m.unity_gain_hz, 'Hz')}"
        if m.gain_margin_db is not None:
            why += f", gain margin {db(m.gain_margin_db)}"
        if m.lower_gain_margin_db is not None:
            why += f", lower gain margin {db(m.lower_gain_margin_db)}"
    if failed:
        why += f"; {len(failed)} of {len(result.requirements)} requirement(s) failed ({', '.join(o.requirement.text for o in failed)})"
    elif result.requirements:
        why += f"; all {len(result.requirements)} requirement(s) met"
    if result.below_common_practice:
        why += f"; {practice_phrase(result.below_common_practice)}"
    return f"{word}  {why}"


def requirement_status(result: LoopResult, outcome: RequirementOutcome) -> str:
    """PASS or FAIL for one requirement; "NO VERDICT" for every requirement of an inconclusive loop (its figures are
    shown, but data that failed a self-check passes and fails nothing)."""
    if result.verdict == "inconclusive":
        return "NO VERDICT"
    return "PASS" if outcome.passed else "FAIL"


def requirement_text(outcome: RequirementOutcome) -> str:
    """ "pm>=60: worst phase margin = 67.03 deg", or the analysis' reason when the value does not exist."""
    req = outcome.requirement
    if outcome.value is None:
        return outcome.reason
    name, unit = METRICS[req.metric]
    text = f"{req.text}: {name} = {requirement_value(unit, outcome.value)}"
    if outcome.value in (float("inf"), float("-inf")):
        text += " (no such phase crossover in the sweep)"
    return text


def load_side(b: BreakInfo) -> str:
    """The load side's terminals; on a node no terminal loads, the behavioural elements whose expression reads it."""
    if b.load_terminals or not b.load_readers:
        return ", ".join(b.load_terminals) or NONE
    return f"{', '.join(b.load_readers)} (an expression reads the node)"


def _break_lines(result: LoopResult) -> list[str]:
    b = result.breaks
    where = f"node {b.node} ({result.method} probe); driver side {b.side_a}, load side {b.side_b}"
    lines = [_row("loop broken at", where)]
    lines.append(_row("  driver", ", ".join(b.driver_terminals) or NONE))
    lines.append(_row("  load", load_side(b)))
    if b.shunt_terminals:
        lines.append(_row("  shunt only", ", ".join(b.shunt_terminals)))
    lines.append(_row("  decided by", b.decided_by or NONE))
    if b.copied_subcircuits:
        lines.append(_row("  copied subcircuits", ", ".join(f"{o} -> {c}" for o, c in b.copied_subcircuits)))
    return lines


def _crossover_lines(a: LoopAnalysis) -> list[str]:
    lines = [f"gain crossovers (|T| = 0 dB): {len(a.gain_crossovers) or 'none in the sweep'}"]
    for c in a.gain_crossovers:
        lines.append(
            f"  {eng(c.freq_hz, 'Hz'):>11}  {c.direction:<4}  phase {deg(c.phase_deg):>12}  PM {deg(c.phase_margin_deg):>11}"
            f"  |T/(1+T)| {db(c.peaking_db):>9}  delay margin {eng(c.delay_margin_s, 's') if c.delay_margin_s is not None else 'none'}"
        )
    lines.append(f"phase crossovers (phase = odd multiple of 180 deg): {len(a.phase_crossovers) or 'none above the floor'}")
    for c in a.phase_crossovers:
        where = "DC" if c.freq_hz == 0 else eng(c.freq_hz, "Hz")
        margin = phase_crossover_margin(c, a.stable)
        lines.append(f"  {where:>11}  {c.kind:<5} |T| {db(c.gain_db):>10}  {margin:<20}  (phase {c.phase_deg:.0f} deg)")
    if a.ignored_phase_crossovers:
        lines.append(
            f"  ({len(a.ignored_phase_crossovers)} more below the numerical floor of {db(a.floor_db)} ignored: the phase is noise there)"
        )
    return lines


def _nyquist_lines(a: LoopAnalysis) -> list[str]:
    n = a.nyquist
    lines = [_row("Nyquist", nyquist_phrase(a))]
    if not n.reliable:
        lines.append(_row("  doubtful because", n.reasons[0] if n.reasons else "the data cannot support the count"))
        lines.extend(_row("", r) for r in n.reasons[1:])
    return lines


def _context_lines(result: LoopResult) -> list[str]:
    lines = []
    if result.breaks.silenced_sources:
        lines.append(_row("silenced sources", ", ".join(result.breaks.silenced_sources) + " (AC magnitude set to 0 in the probe deck)"))
    ignored = result.ignored_statements
    if ignored:
        lines.append(_row("ignored statements", f"{len(ignored)} (netloop runs only its own AC analysis)"))
        lines.extend(f"  {s}" for s in ignored[:_SHOWN_STATEMENTS])
        if len(ignored) > _SHOWN_STATEMENTS:
            lines.append(f"  ... and {len(ignored) - _SHOWN_STATEMENTS} more")
    doubts = result.failed_checks
    if doubts:
        lines.append("self-checks failed (no verdict is given)")
        for c in doubts:
            lines.append(f"  - {c.name}: {c.detail}")
            lines.append(f"    try: {c.advice}")
    if result.requirements:
        lines.append("requirements")
        lines.extend(f"  {requirement_status(result, o)}  {requirement_text(o)}" for o in result.requirements)
    if result.warnings:
        lines.append("warnings")
        lines.extend(f"  - {w}" for w in result.warnings)
    return lines


def format_text(result: LoopResult, *, colour: bool = False) -> str:
    """The terminal summary of one loop (plain ASCII text, verdict on the first line, caution on the last).

    colour=True paints every PASS green and every FAIL red with ANSI escapes (for a terminal; the
    caller decides, e.g. ``sys.stdout.isatty()``); the text is otherwise identical.
    """
    text = _plain_text(result)
    if not colour:
        return text
    return _PASS_FAIL.sub(lambda m: f"{m.group(1)}{_ANSI[m.group(2)]}{m.group(2)}{_RESET}", text)


_ANSI = {"PASS": "\x1b[1;32m", "FAIL": "\x1b[1;31m", "INCONCLUSIVE": "\x1b[1;33m"}
_RESET = "\x1b[0m"
_PASS_FAIL = re.compile(r"^( *)(PASS|FAIL|INCONCLUSIVE)(?=  )", re.M)


def _plain_text(result: LoopResult) -> str:
    a = result.analysis
    title = result.netlist + (f"  [{result.label}]" if result.label else "")
    sim = result.sim
    lines = [
        verdict_line(result),
        *(f"  but: {c}" for c in result.caveats),  # what may make the verdict answer another circuit than the one meant
        _row("netlist", title),
        *_break_lines(result),
        _row(*low_gain_phrase(a)),
        *_crossover_lines(a),
        *(_row(label, value) for label, value in margin_phrases(a)),
        *(_row(label, value) for label, value in closed_loop_phrases(a)),
        *_nyquist_lines(a),
        *_context_lines(result),
        _row("simulation", f"{sim.backend}" + (f" ({sim.processes} processes)" if sim.processes > 1 else "") + f", {sim.points} points, {sim.refinement_rounds} refinement round(s)"
             + ("" if sim.refined else " (phase margin not settled)")
             + (f", convergence aid: {sim.convergence_aid}" if sim.convergence_aid else "")),
        f"caution: {result.caution}",
    ]
    return "\n".join(lines) + "\n"
