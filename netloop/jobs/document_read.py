"""A loop document (schema "netloop.loop/1") read back into the LoopResult it was written from.

A corner run keeps each corner's loop as its document (netloop.jobs.document.to_document) in the
results file; reports that draw a corner's Bode or Nyquist plot later, from that file alone, need the
LoopResult again. Every field of the record is in the document except two that are derived: a gain
crossover's small-angle peaking (1 / |PM in radians|, computed here as the analysis does) and
``regulates`` (|T| > 1 somewhere in the sampled return ratio, read from it). A number the document
lists under ``infinite`` comes back as that infinity. The document lists every self-check without
saying whose it was: they come back as the analysis's own when its classification is "inconclusive"
(an analysis check failed), else as the job's, so ``all_checks``, the verdict and the
classification are unchanged.
"""

from __future__ import annotations

import math

import numpy as np

from netloop.analysis.requirements import Requirement, RequirementOutcome
from netloop.analysis.results import (
    Check,
    ClosedLoopPoles,
    GainCrossover,
    LoopAnalysis,
    Margins,
    NyquistVerdict,
    Peaking,
    PhaseCrossover,
    SecondOrderEstimate,
)
from netloop.errors import ResultsError
from netloop.jobs.document import SCHEMA
from netloop.jobs.loop_result import BreakInfo, LoopResult, SimInfo

__all__ = ["result_from_document"]

_SIGNS = {"+inf": math.inf, "-inf": -math.inf, "nan": math.nan}


class _Reader:
    """Values of one document by dotted path, with the ``infinite`` map applied."""

    def __init__(self, doc: dict):
        self.infinite = doc.get("infinite") or {}

    def get(self, path: str, value: object) -> object:
        if value is None and path in self.infinite:
            return _SIGNS[self.infinite[path]]
        return value

    def fields(self, prefix: str, data: dict | None, keys: tuple[str, ...]) -> dict:
        data = data or {}
        return {k: self.get(f"{prefix}.{k}", data.get(k)) for k in keys}


def _small_angle(pm_deg: float) -> float:
    angle = abs(math.radians(pm_deg))
    return math.inf if angle == 0 else 1.0 / angle


def _gains(rd: _Reader, items: list[dict]) -> tuple[GainCrossover, ...]:
    keys = ("freq_hz", "phase_deg", "phase_margin_deg", "direction", "peaking_exact", "peaking_db", "delay_margin_s")
    out = []
    for i, c in enumerate(items):
        f = rd.fields(f"crossovers.gain[{i}]", c, keys)
        out.append(GainCrossover(f["freq_hz"], f["phase_deg"], f["phase_margin_deg"], f["direction"], f["peaking_exact"],
                                 f["peaking_db"], _small_angle(f["phase_margin_deg"]), f["delay_margin_s"]))
    return tuple(out)


def _phases(rd: _Reader, items: list[dict], where: str) -> tuple[PhaseCrossover, ...]:
    keys = ("freq_hz", "phase_deg", "gain_db", "gain_margin_db", "kind")
    return tuple(PhaseCrossover(**rd.fields(f"crossovers.{where}[{i}]", c, keys)) for i, c in enumerate(items))


def _analysis(rd: _Reader, doc: dict, checks: tuple[Check, ...]) -> LoopAnalysis:
    gain = doc["loop_gain"]
    freq = np.asarray(gain["freq_hz"], dtype=float)
    t = np.asarray(gain["re"], dtype=float) + 1j * np.asarray(gain["im"], dtype=float)
    cross = doc["crossovers"]
    m = rd.fields("margins", doc["margins"], ("phase_margin_deg", "unity_gain_hz", "gain_margin_db", "phase_crossover_hz",
                                               "lower_gain_margin_db", "lower_phase_crossover_hz", "modulus_margin",
                                               "modulus_freq_hz", "delay_margin_s"))
    peak = rd.fields("peaking", doc["peaking"], ("peak_db", "peak_freq_hz", "reference_db", "absolute_peak_db"))
    so = doc["second_order_estimate"]
    second = None
    if so.get("phase_margin_deg") is not None:
        second = SecondOrderEstimate(**rd.fields("second_order_estimate", so, ("phase_margin_deg", "damping_ratio", "q",
                                                                              "overshoot_pct", "resonant_peak_db")))
    st = doc["stability"]
    nyquist = NyquistVerdict(st["encirclements"], st["open_loop_rhp_poles"], st["closed_loop_rhp_poles"], st["stable"],
                             st["reliable"], tuple(st["reasons"]), st["origin_poles"],
                             st.get("open_loop_rhp_from", "given"))  # results files written before it was recorded
    cp = doc["closed_loop_poles"]
    poles = None
    if cp.get("fitted"):
        f = rd.fields("closed_loop_poles", cp, ("rhp_count", "dominant_damping", "dominant_q", "dominant_freq_hz",
                                                 "agrees_with_nyquist", "fit_error"))
        poles = ClosedLoopPoles(tuple(complex(re, im) for re, im in cp["poles_rad_s"]), f["rhp_count"], f["dominant_damping"],
                                f["dominant_q"], f["dominant_freq_hz"], f["agrees_with_nyquist"], f["fit_error"])
    return LoopAnalysis(
        freq_hz=freq,
        t=t,
        dc_gain_db=rd.get("dc_loop_gain_db", doc["dc_loop_gain_db"]),
        regulates=bool(np.any(np.abs(t) > 1.0)),
        gain_crossovers=_gains(rd, cross["gain"]),
        phase_crossovers=_phases(rd, cross["phase"], "phase"),
        ignored_phase_crossovers=_phases(rd, cross["ignored_phase"], "ignored_phase"),
        floor_db=cross["floor_db"],
        margins=Margins(**m),
        peaking=Peaking(**peak),
        second_order=second,
        nyquist=nyquist,
        poles=poles,
        warnings=(),
        checks=checks,
    )


def _requirement(rd: _Reader, i: int, q: dict) -> RequirementOutcome:
    threshold = rd.get(f"requirements[{i}].threshold", q["threshold"])
    value = rd.get(f"requirements[{i}].value", q["value"])
    return RequirementOutcome(Requirement(q["metric"], q["op"], threshold, q["text"]), value, q["passed"], q["reason"])


def result_from_document(doc: dict) -> LoopResult:
    """The LoopResult a loop document was written from (see the module docstring); ResultsError when ``doc`` is
    not a complete netloop.loop/1 document."""
    if not isinstance(doc, dict) or doc.get("schema") != SCHEMA:
        raise ResultsError(f"not a loop document of schema {SCHEMA}")
    rd = _Reader(doc)
    try:
        checks = tuple(Check(c["name"], c["passed"], c["detail"], c["advice"]) for c in doc["checks"])
        inconclusive = doc["classification"] == "inconclusive"  # the analysis's own checks failed: they go back there
        b = doc["break"]
        breaks = BreakInfo(b["node"], b["side_a"], b["side_b"], tuple(b["driver_terminals"]), tuple(b["load_terminals"]),
                           tuple(b["shunt_terminals"]), b["decided_by"], tuple(b["silenced_sources"]),
                           tuple(tuple(pair) for pair in b["copied_subcircuits"]), tuple(b.get("load_readers", ())))
        return LoopResult(
            netlist=doc["netlist"],
            label=doc["label"],
            method=doc["method"],
            breaks=breaks,
            analysis=_analysis(rd, doc, checks if inconclusive else ()),
            requirements=tuple(_requirement(rd, i, q) for i, q in enumerate(doc["requirements"])),
            ignored_statements=tuple(doc["ignored_statements"]),
            warnings=tuple(doc["warnings"]),
            sim=SimInfo(**doc["simulation"]),
            caution=doc["caution"],
            checks=() if inconclusive else checks,
            caveats=tuple(doc.get("caveats", ())),  # not in files written before the key existed
            library_warnings=tuple(doc.get("library_warnings", ())),
        )
    except (KeyError, TypeError, ValueError) as exc:
        raise ResultsError(f"an incomplete loop document ({type(exc).__name__}: {exc}); was it written by this version of netloop?") from exc
