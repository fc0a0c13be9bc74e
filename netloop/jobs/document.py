"""The JSON document of a measured loop (schema "netloop.loop/1") and of several loops.

Every key below is always present. A quantity that does not exist for the loop is ``null``
(never a missing key), with the same meaning as ``None`` in netloop.analysis.results. JSON has no
infinity and no NaN, so a number that exists but is infinite (the peaking of a crossover with a
phase margin of exactly 0, the Q of an undamped pole pair, a requirement "gm>=10" met because the
loop has no upper phase crossover) is written as ``null`` AND listed in the top-level
``infinite`` object, which maps the dotted path of each such field to "+inf" or "-inf"
(a NaN, which analyse() never produces, would be listed there as "nan"). So a field is null
because the quantity does not exist exactly when its path is not a key of ``infinite``.

Units are in the key names: ``_hz`` hertz, ``_deg`` degrees, ``_db`` decibels of |T| (20 log10),
``_s`` seconds, ``_rad_s`` radians per second; a name without a unit is a plain ratio.

    schema                "netloop.loop/1"
    netlist, label        the netlist's path as given; corner or loop name ("" for one check)
    method                "tian" | "middlebrook"
    verdict               "pass" | "fail" | "inconclusive" (netloop.jobs.loop_result.VERDICTS)
    classification        "stable" | "unstable" | "does not regulate" | "inconclusive"
    passed                verdict == "pass": every self-check passed, stable by the Nyquist count
                          and every requirement met
    checks                [{name, passed, detail, advice}]: the measurement's self-checks (a failed
                          one makes the verdict "inconclusive"; netloop.analysis.checks)
    below_common_practice [{text, value, reason}]: a passing loop checked without requirements,
                          the rules of thumb it misses (netloop.jobs.loop_result.COMMON_PRACTICE:
                          pm>=45, gm>=10, peak<=3); they do not change the verdict
    dc_loop_gain_db       20 log10 |T| at the lowest swept frequency
    margins               the worst case over all crossovers:
        phase_margin_deg, unity_gain_hz, gain_margin_db, phase_crossover_hz,
        lower_gain_margin_db, lower_phase_crossover_hz, modulus_margin (min |1 + T|),
        modulus_margin_db (20 log10 of it), modulus_freq_hz, delay_margin_s
    crossovers
        gain              [{freq_hz, phase_deg, phase_margin_deg, direction ("down"|"up"),
                            peaking_db, peaking_exact, delay_margin_s}]   ascending frequency
        phase             [{freq_hz, phase_deg, gain_db, gain_margin_db, kind ("upper"|"lower")}]
        ignored_phase_count, ignored_phase   phase crossovers below the numerical floor (same shape)
        floor_db          that floor
    peaking               {peak_db, peak_freq_hz, reference_db, absolute_peak_db,
                           at_worst_crossover_db (peaking_db of the worst-PM crossover)}
    second_order_estimate {is_estimate: true, phase_margin_deg, damping_ratio, q, overshoot_pct,
                           resonant_peak_db}   all null when there is no estimate
    stability             {stable, encirclements, open_loop_rhp_poles, open_loop_rhp_from ("fit": read from
                           the data, "given", "assumed"), closed_loop_rhp_poles, reliable, reasons, origin_poles}
    closed_loop_poles     {fitted, poles_rad_s ([re, im] pairs in rad/s), rhp_count,
                           dominant_freq_hz, dominant_damping, dominant_q, agrees_with_nyquist,
                           fit_error}   fitted false and the rest null/[] when no fit was made
    break                 {node, side_a, side_b, driver_terminals, load_terminals, shunt_terminals,
                           decided_by, silenced_sources, copied_subcircuits ([original, copy]),
                           load_readers (no load terminal: the elements whose expression reads the node)}
    requirements          [{text, metric, op, threshold, value, passed, reason}]
    ignored_statements    ["file:line: statement"]
    warnings              [sentence]: the netlist's caveats first, the circuit's own, then one line that counts
                          the library_warnings
    caveats               [sentence]: what in the netlist may make the verdict answer another circuit than the one
                          meant (a title line that reads as an element, a .control block left open or changing a
                          source, parameter or the temperature), with file:line; also said beside the verdict
    library_warnings      [sentence]: each warning about library content the circuit does not instantiate
    simulation            {backend, points, refinement_rounds, refined, convergence_aid,
                           deck_path, seconds, processes, loads, ngspice_seconds}
    loop_gain             {freq_hz, re, im}: the sampled return ratio T
    caution               the caution sentence
    infinite              {dotted.path: "+inf" | "-inf"}

Every loop group (``check`` without --at): ``groups_document(check)`` gives ``multi_document("loops", ...)``'s
shape with one entry per group, in group order: a measured group's entry is its loop document plus
``measured: true`` and ``group`` {index, chosen, why, can_ring, passed_over, tried}; a group no break
could measure has only ``label``, ``verdict`` ("inconclusive"), ``passed`` (false), ``measured``
(false), ``reason``, ``advice`` and ``group``.

Several loops: ``multi_document("loops" | "locations", results)`` gives
``{"schema": "netloop.loops/1", "loops": [loop, ...], "verdict": ..., "passed": ...}`` (or ``locations``), and
``multi_document("modes", {"differential": r1, "common": r2})`` gives ``{"modes": {name: loop}}``.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import fields

import numpy as np

from netloop.analysis.response import ratio_db
from netloop.analysis.results import GainCrossover, LoopAnalysis, PhaseCrossover
from netloop.jobs.loop_result import LoopResult, combined_verdict

__all__ = ["CORNERS_SCHEMA", "SCHEMA", "groups_document", "json_document", "multi_document", "to_document"]

SCHEMA = "netloop.loop/1"
CORNERS_SCHEMA = "netloop.corners/1"  # a corner run: netloop.report.corner_records; its results file: netloop.jobs.corners.journal
_KINDS = ("loops", "locations", "modes")


_GAIN_KEYS = ("freq_hz", "phase_deg", "phase_margin_deg", "direction", "peaking_db", "peaking_exact", "delay_margin_s")
_PHASE_KEYS = ("freq_hz", "phase_deg", "gain_db", "gain_margin_db", "kind")
_MARGIN_KEYS = ("phase_margin_deg", "unity_gain_hz", "gain_margin_db", "phase_crossover_hz", "lower_gain_margin_db",
                "lower_phase_crossover_hz", "modulus_margin", "modulus_margin_db", "modulus_freq_hz", "delay_margin_s")
_SECOND_ORDER_KEYS = ("phase_margin_deg", "damping_ratio", "q", "overshoot_pct", "resonant_peak_db")
_POLE_KEYS = ("rhp_count", "dominant_freq_hz", "dominant_damping", "dominant_q", "agrees_with_nyquist", "fit_error")


def _fields(record: object | None, keys: tuple[str, ...], **computed) -> dict:
    """``{key: record.key}`` in the order of ``keys`` (all None for no record); ``computed`` supplies keys the record lacks."""
    return {k: computed[k] if k in computed else None if record is None else getattr(record, k) for k in keys}


def _flat(record: object) -> dict:
    """dataclasses.asdict of a record whose fields are plain values (numbers, strings, None), as asdict gives it, without
    its deep copy of each value (Peaking and SimInfo: 6 us instead of 23, timeit)."""
    return {f.name: getattr(record, f.name) for f in fields(record)}


def _gain(c: GainCrossover) -> dict:
    return _fields(c, _GAIN_KEYS)


def _phase(c: PhaseCrossover) -> dict:
    return _fields(c, _PHASE_KEYS)


def worst_crossover(a: LoopAnalysis) -> GainCrossover | None:
    """The gain crossover that gives the worst phase margin (None without a crossover)."""
    if a.margins.unity_gain_hz is None or not a.gain_crossovers:
        return None
    return min(a.gain_crossovers, key=lambda c: abs(c.freq_hz - a.margins.unity_gain_hz))


def _margins(a: LoopAnalysis) -> dict:
    return _fields(a.margins, _MARGIN_KEYS, modulus_margin_db=ratio_db(a.margins.modulus_margin))


def _second_order(a: LoopAnalysis) -> dict:
    return {"is_estimate": True, **_fields(a.second_order, _SECOND_ORDER_KEYS)}


def _poles(a: LoopAnalysis) -> dict:
    p = a.poles
    if p is None:
        return {"fitted": False, "poles_rad_s": [], **_fields(None, _POLE_KEYS)}
    return {"fitted": True, "poles_rad_s": [[complex(z).real, complex(z).imag] for z in p.poles_rad_s], **_fields(p, _POLE_KEYS)}


def _analysis(a: LoopAnalysis) -> dict:
    worst = worst_crossover(a)
    nyq = a.nyquist
    return {
        "classification": a.classification,
        "dc_loop_gain_db": a.dc_gain_db,
        "margins": _margins(a),
        "crossovers": {
            "gain": [_gain(c) for c in a.gain_crossovers],
            "phase": [_phase(c) for c in a.phase_crossovers],
            "ignored_phase_count": len(a.ignored_phase_crossovers),
            "ignored_phase": [_phase(c) for c in a.ignored_phase_crossovers],
            "floor_db": a.floor_db,
        },
        "peaking": {**_flat(a.peaking), "at_worst_crossover_db": None if worst is None else worst.peaking_db},
        "second_order_estimate": _second_order(a),
        "stability": {
            "stable": nyq.stable,
            "encirclements": nyq.encirclements,
            "open_loop_rhp_poles": nyq.open_loop_rhp_poles,
            "open_loop_rhp_from": nyq.open_loop_rhp_from,
            "closed_loop_rhp_poles": nyq.closed_loop_rhp_poles,
            "reliable": nyq.reliable,
            "reasons": list(nyq.reasons),
            "origin_poles": nyq.origin_poles,
        },
        "closed_loop_poles": _poles(a),
    }


def _break(result: LoopResult) -> dict:
    b = result.breaks
    return {
        "node": b.node,
        "side_a": b.side_a,
        "side_b": b.side_b,
        "driver_terminals": list(b.driver_terminals),
        "load_terminals": list(b.load_terminals),
        "shunt_terminals": list(b.shunt_terminals),
        "decided_by": b.decided_by,
        "silenced_sources": list(b.silenced_sources),
        "copied_subcircuits": [list(pair) for pair in b.copied_subcircuits],
        "load_readers": list(b.load_readers),
    }


def _requirements(result: LoopResult) -> list[dict]:
    return [
        {
            "text": o.requirement.text,
            "metric": o.requirement.metric,
            "op": o.requirement.op,
            "threshold": o.requirement.threshold,
            "value": o.value,
            "passed": o.passed,
            "reason": o.reason,
        }
        for o in result.requirements
    ]


def _as_is(value) -> bool:
    """Whether _plain gives ``value`` back as it is: a str, None, a bool, an int or a finite float (exactly those types).
    Checked before a member's path is written, which only a non-finite float or a container needs (to_document: about
    half its time went to the paths of such members and to the isinstance chain below)."""
    kind = type(value)
    return kind is str or value is None or kind is bool or kind is int or (kind is float and math.isfinite(value))


def _plain(value, path: str, infinite: dict[str, str]):
    """Convert to JSON-ready builtins; non-finite floats become None and are noted in `infinite`."""
    if isinstance(value, dict):
        return {k: v if _as_is(v) else _plain(v, f"{path}.{k}" if path else k, infinite) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        if all(type(v) is float for v in value) and all(map(math.isfinite, value)):  # finite floats (T's samples): as they are
            return list(value)
        return [v if _as_is(v) else _plain(v, f"{path}[{i}]", infinite) for i, v in enumerate(value)]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        x = float(value)
        if math.isfinite(x):
            return x
        infinite[path] = "nan" if math.isnan(x) else ("+inf" if x > 0 else "-inf")
        return None
    return value


def json_document(raw: dict) -> dict:
    """``raw`` with builtins only and non-finite floats as null, listed under ``infinite`` (see the module docstring)."""
    infinite: dict[str, str] = {}
    doc = _plain(raw, "", infinite)
    doc["infinite"] = infinite
    return doc


def to_document(result: LoopResult) -> dict:
    """The JSON document of one loop (see the module docstring): builtins only, json.dumps(allow_nan=False) works."""
    a = result.analysis
    raw = {
        "schema": SCHEMA,
        "netlist": result.netlist,
        "label": result.label,
        "method": result.method,
        "verdict": result.verdict,
        "passed": result.passed,
        "checks": [{"name": c.name, "passed": c.passed, "detail": c.detail, "advice": c.advice} for c in result.all_checks],
        "below_common_practice": [{"text": o.requirement.text, "value": o.value, "reason": o.reason}
                                  for o in result.below_common_practice],
        **_analysis(a),
        "break": _break(result),
        "requirements": _requirements(result),
        "ignored_statements": list(result.ignored_statements),
        "warnings": list(result.warnings),
        "caveats": list(result.caveats),
        "library_warnings": list(result.library_warnings),
        "simulation": _flat(result.sim),
        "loop_gain": {
            "freq_hz": np.asarray(a.freq_hz, dtype=float).tolist(),
            "re": np.asarray(a.t).real.astype(float).tolist(),
            "im": np.asarray(a.t).imag.astype(float).tolist(),
        },
        "caution": result.caution,
    }
    return json_document(raw)


def multi_document(kind: str, results: Iterable[LoopResult] | Mapping[str, LoopResult], **extra) -> dict:
    """The document of several loops: kind "loops" or "locations" (a list) or "modes" (a name -> result mapping).

    Each loop has the shape of to_document(); `extra` adds top-level keys (e.g. the netlist);
    ``passed`` is True when every loop passed.
    """
    if kind not in _KINDS:
        raise ValueError(f"kind must be one of {', '.join(_KINDS)}, got {kind!r}")
    if kind == "modes":
        if not isinstance(results, Mapping):
            raise TypeError("kind 'modes' takes a mapping of mode name to LoopResult")
        body: dict | list = {name: to_document(r) for name, r in results.items()}
        items = list(results.values())
    else:
        items = list(results.values()) if isinstance(results, Mapping) else list(results)
        body = [to_document(r) for r in items]
    verdict = combined_verdict(r.verdict for r in items)
    infinite: dict[str, str] = {}
    head = _plain(dict(extra), "", infinite)
    if infinite:
        head["infinite"] = infinite
    return {"schema": f"netloop.{kind}/1", **head, kind: body, "verdict": verdict, "passed": verdict == "pass"}


def groups_document(check) -> dict:
    """The document of every loop group measured on its own (a netloop.jobs.discover.LoopsCheck): one entry per group."""
    entries = []
    for g in check.groups:
        about = {"index": g.census.group.index, "chosen": g.census.chosen, "why": g.why or g.census.why, "can_ring": g.census.can_ring,
                 "passed_over": list(g.census.passed_over), "tried": list(g.tried)}
        if g.result is not None:
            entries.append({**to_document(g.result), "measured": True, "group": about})
        else:
            entries.append({"label": g.label, "verdict": g.verdict, "passed": False, "measured": False, "reason": g.reason,
                            "advice": g.advice, "group": about})
    verdict = check.verdict
    return {"schema": "netloop.loops/1", "netlist": check.census.source, "loops": entries, "verdict": verdict,
            "passed": verdict == "pass", "notes": list(check.notes)}
