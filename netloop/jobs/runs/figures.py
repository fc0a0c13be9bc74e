"""The figures of a corner record, read from its loop document: pm, gm, fc, peak and the other requirement metrics."""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = ["FIGURES", "MAP_FIGURES", "Figure", "figure_value", "measured"]


@dataclass(frozen=True, slots=True)
class Figure:
    """One figure of a loop: its requirement metric, name, unit as printed, and where the loop document keeps it."""

    metric: str  # a key of netloop.analysis.requirements.METRICS
    name: str
    unit: str  # "deg", "dB", "Hz" or "" (a plain ratio)
    path: str  # dotted path in the loop document (netloop.jobs.document)
    worse: int  # -1: lower is worse (pm, gm, fc, ...), +1: higher is worse (peak)
    log: bool = False  # spans decades (fc, dm): interpolated and drawn in log10 of the value


FIGURES: dict[str, Figure] = {f.metric: f for f in (
    Figure("pm", "phase margin", "deg", "margins.phase_margin_deg", -1),
    Figure("gm", "gain margin", "dB", "margins.gain_margin_db", -1),
    Figure("fc", "crossover", "Hz", "margins.unity_gain_hz", -1, log=True),
    Figure("peak", "peaking", "dB", "peaking.peak_db", +1),
    Figure("lgm", "lower gain margin", "dB", "margins.lower_gain_margin_db", -1),
    Figure("mm", "modulus margin", "", "margins.modulus_margin", -1),
    Figure("dm", "delay margin", "s", "margins.delay_margin_s", -1, log=True),
    Figure("dc", "DC loop gain", "dB", "dc_loop_gain_db", -1),
)}
"""Every figure a requirement can name (netloop.analysis.requirements.METRICS), by metric."""

MAP_FIGURES = ("pm", "gm", "fc", "peak")
"""The figures drawn on maps and compared with a baseline."""


def measured(record: dict) -> bool:
    """Whether a record's figures can be used: it was measured and its self-checks passed (not error, not inconclusive)."""
    return record.get("outcome") in ("pass", "fail") and record.get("loop") is not None


def figure_value(record: dict, metric: str) -> float | None:
    """The figure ``metric`` of a record's loop: a float, +-inf where the document says so (a gain margin with no
    phase crossover), or None when the loop has no such figure or the record has no loop."""
    doc = record.get("loop")
    if not doc:
        return None
    path = FIGURES[metric].path
    value: object = doc
    for part in path.split("."):
        value = value.get(part) if isinstance(value, dict) else None
    if value is None:
        sign = (doc.get("infinite") or {}).get(path)
        return {"+inf": math.inf, "-inf": -math.inf}.get(sign)
    return float(value)
