"""Requirement boundaries in words: "pm >= 45 holds for iload <= 43 mA at ss/125C", one sentence per line of corners."""

from __future__ import annotations

from collections.abc import Sequence

from netloop.analysis.requirements import Requirement
from netloop.jobs.runs.axes import NumericAxis, lines_along, numeric_axes
from netloop.jobs.runs.boundary import INTERPOLATION, Boundary, Crossing, boundaries
from netloop.report.notation import eng

__all__ = ["METHOD", "axis_range", "axis_value", "boundary_sentence", "boundary_sentences", "boundary_text"]

METHOD = "Boundaries are interpolated between the two corners that bracket them, by " + INTERPOLATION + "."
"""The interpolation method, stated wherever boundaries are given."""


def axis_value(axis: NumericAxis, value: float) -> str:
    """A value of an axis as printed: engineering notation with the axis's unit ("43.1 mA", "125 °C", "0.3")."""
    return eng(value, axis.unit)


def axis_range(axis: NumericAxis) -> str:
    """"esr from 10 mΩ to 10 Ω (10 values, log scale)"."""
    scale = "log scale" if axis.log else "linear scale"
    return f"{axis.name} from {axis_value(axis, axis.values[0])} to {axis_value(axis, axis.values[-1])} ({len(axis.values)} values, {scale})"


def _bound(axis: NumericAxis, c: Crossing) -> str:
    if c.value is not None:
        return axis_value(axis, c.value)
    return f"{axis_value(axis, c.low)} to {axis_value(axis, c.high)}"


def _segments(b: Boundary) -> list[tuple[Crossing | None, Crossing | None]]:
    """Where the requirement holds: (start, end) pairs, None for the line's own first or last corner."""
    first = next((h for h in b.holds if h is not None), None)
    segments: list[tuple[Crossing | None, Crossing | None]] = []
    start: Crossing | None = None
    holding = bool(first)
    for c in b.crossings:
        if holding and not c.holds_above:
            segments.append((start, c))
            holding = False
        elif not holding and c.holds_above:
            start, holding = c, True
    if holding:
        segments.append((start, None))
    return segments


def boundary_sentence(b: Boundary, *, several_nodes: bool = False) -> str:
    """One sentence: where along the line the requirement holds, e.g. "pm >= 45 holds for 57.4 mΩ <= esr <= 3.16 Ω
    at iload=3m"; "holds over the whole line" or "holds nowhere" when it does not change; "not measured at ..." and
    why a crossing was not interpolated, where that applies."""
    line, axis, req = b.line, b.line.axis, b.requirement
    where = " at " + " ".join(x for x in (line.context, f"(break node {line.at})" if several_nodes and line.at else "") if x)
    where = "" if where == " at " else where
    known = [v for (v, _), h in zip(line.points, b.holds) if h is not None]
    if not known:
        text = f"{req.text}: no corner of this line was measured{where}"
    elif b.everywhere is True:
        text = f"{req.text} holds over the whole line, {axis.name} from {axis_value(axis, known[0])} to {axis_value(axis, known[-1])}{where}"
    elif b.everywhere is False:
        text = f"{req.text} holds nowhere from {axis.name} = {axis_value(axis, known[0])} to {axis_value(axis, known[-1])}{where}"
    else:
        parts = []
        for start, end in _segments(b):
            if start is None and end is not None:
                parts.append(f"{axis.name} <= {_bound(axis, end)}")
            elif start is not None and end is None:
                parts.append(f"{axis.name} >= {_bound(axis, start)}")
            elif start is not None and end is not None:
                parts.append(f"{_bound(axis, start)} <= {axis.name} <= {_bound(axis, end)}")
        text = f"{req.text} holds for {' and '.join(parts)}{where}"
    notes = [f"between {axis_value(axis, c.low)} and {axis_value(axis, c.high)} not interpolated: {c.why}" for c in b.crossings if c.why]
    if b.unmeasured:
        notes.append("not measured at " + ", ".join(axis_value(axis, v) for v in b.unmeasured))
    return text + (f" ({'; '.join(notes)})" if notes else "")


def boundary_sentences(records: tuple[dict, ...], requirements: Sequence[Requirement], units: dict[str, str] | None = None) -> list[tuple[str, list[str]]]:
    """For every numeric axis of the records: (a heading naming the axis and its range, the sentences of every
    requirement along every line). Empty when the run has no numeric axis or no requirement."""
    out = []
    several = len({r.get("at") for r in records if r.get("at")}) > 1
    for axis in numeric_axes(records, units):
        lines = lines_along(records, axis)
        sentences = [boundary_sentence(b, several_nodes=several) for req in requirements for b in boundaries(req, lines)]
        if sentences:
            out.append((f"along {axis_range(axis)}", sentences))
    return out


def boundary_text(records: tuple[dict, ...], requirements: Sequence[Requirement], units: dict[str, str] | None = None) -> str:
    """The boundaries for the terminal: per axis, the lines where a requirement changes or holds nowhere, one
    sentence each, and how many lines it holds over entirely; then the method. "" without numeric axes or requirements."""
    out = []
    interpolated = False
    several = len({r.get("at") for r in records if r.get("at")}) > 1
    for axis in numeric_axes(records, units):
        lines = lines_along(records, axis)
        shown, whole = [], {}
        for req in requirements:
            for b in boundaries(req, lines):
                if b.everywhere is True:
                    whole[req.text] = whole.get(req.text, 0) + 1
                else:
                    shown.append(boundary_sentence(b, several_nodes=several))
        if not shown and not whole:
            continue
        out.append(f"  along {axis_range(axis)}:")
        out += [f"    {s}" for s in shown]
        out += [f"    {text} holds over the whole line on {n} of {len(lines)} line(s)" for text, n in whole.items()]
        interpolated = interpolated or any(shown)
    if not out:
        return ""
    head = "where the requirements hold, along each numeric axis with the other settings fixed:"
    return "\n".join([head, *out, *([METHOD] if interpolated else [])])
