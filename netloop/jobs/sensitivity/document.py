"""The JSON document of a sensitivity run (schema "netloop.sensitivity/1"); the keys are listed in docs/sensitivity-json.md.

Every key is always present; a quantity that does not exist is null, and one that exists but is
infinite is null and listed under ``infinite`` (as in the loop document, netloop.jobs.document).
Units are in the key names: ``_deg_per_decade`` degrees of phase margin per decade of the value
(d PM / d log10 x), ``_db_per_decade``, ``_hz_per_decade``; a knob's ``value`` is in its ``unit``.
"""

from __future__ import annotations

import math

from netloop.analysis.local import LocalReading
from netloop.jobs.document import json_document, to_document
from netloop.jobs.loop_result import CAUTION, LoopResult
from netloop.jobs.sensitivity.records import (
    FIGURES,
    STEPS,
    Sensitivity,
    SensitivityRun,
    WhatIf,
)

__all__ = ["SENSITIVITY_SCHEMA", "sensitivity_document"]

SENSITIVITY_SCHEMA = "netloop.sensitivity/1"
_SLOPE_UNITS = {"pm": "deg", "gm": "db", "fc": "hz", "peak": "db"}


def _figures(r: LocalReading) -> dict:
    return {"phase_margin_deg": r.phase_margin_deg, "gain_margin_db": r.gain_margin_db, "unity_gain_hz": r.unity_gain_hz,
            "peak_db": r.peak_db}


def _sensitivity(rank: int, s: Sensitivity) -> dict:
    k = s.knob
    out = {
        "rank": rank,
        "knob": k.name,
        "element": k.element,
        "parameter": k.parameter,
        "device": k.device,
        "quantity": k.quantity,
        "unit": k.unit,
        "value": s.value,
        "location": f"{k.location.file}:{k.location.line}",
        "keeps_operating_point": k.keeps_operating_point,
        "reload": k.reload or None,
    }
    for figure in FIGURES:
        slope = s.slope(figure)
        unit = _SLOPE_UNITS[figure]
        out[f"{figure}_{unit}_per_decade"] = slope.per_decade
        out[f"{figure}_error_{unit}_per_decade"] = slope.error
    out["whole_sweeps"] = s.whole_sweeps
    out["problem"] = s.problem
    out["probes"] = [{"scale": p.scale, **_figures(p.figures), "whole_sweep": p.whole_sweep} for p in s.probes]
    return out


def _check(result: LoopResult | None) -> dict | None:
    if result is None:
        return None
    m = result.analysis.margins
    return {
        "phase_margin_deg": m.phase_margin_deg,
        "gain_margin_db": m.gain_margin_db,
        "unity_gain_hz": m.unity_gain_hz,
        "peak_db": result.analysis.peaking.peak_db,
        "verdict": result.verdict,
        "requirement_met": all(o.passed for o in result.requirements),
        "requirements": [{"text": o.requirement.text, "value": o.value, "passed": o.passed, "reason": o.reason} for o in result.requirements],
    }


def _what_if(w: WhatIf) -> dict:
    return {
        "requirement": w.requirement,
        "knob": w.knob.name,
        "unit": w.knob.unit,
        "value": w.value,
        "solved_value": w.solved_value,
        "factor": w.factor,
        "span": list(w.span),
        "met_at_value": w.met_at_value,
        "monotonic": w.monotonic,
        "tried": [{"factor": f, "figure": v} for f, v in w.tried],
        "answer": w.answer,
        "edited_card": w.edited,
        "check": _check(w.check),
        "confirmed": w.confirmed,
    }


def sensitivity_document(run: SensitivityRun) -> dict:
    """The document of a sensitivity run: builtins only, json.dumps(allow_nan=False) works."""
    raw = {
        "schema": SENSITIVITY_SCHEMA,
        "verdict": run.verdict,
        "at": run.at,
        "withheld": run.withheld,
        "rank_by": run.rank_by,
        "step": {
            "ln_step": run.step,
            "scales": [math.exp(k * run.step) for k in STEPS],
            "difference": "central, (F(x e^h) - F(x e^-h)) / (2h) * ln 10 per decade",
            "error_estimate": "|D(h) - D(2h)| / 3",
        },
        "windows": run.window_count,
        "workers": run.workers,
        "seconds": run.seconds,
        "sensitivities": [_sensitivity(i + 1, s) for i, s in enumerate(run.sensitivities)],
        "what_ifs": [_what_if(w) for w in run.what_ifs],
        "caution": [run.caution, CAUTION],
    }
    doc = json_document(raw)
    doc["loop"] = to_document(run.nominal)
    return doc
