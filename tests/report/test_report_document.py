"""The JSON document: every key present, null where a quantity does not exist, values from the analysis."""

from __future__ import annotations

import json
import math

import control
import numpy as np
import pytest
from report_loops import W

from netloop.report import SCHEMA, multi_document, to_document

REQUIRED = (
    "break.node",
    "method",
    "margins.phase_margin_deg",
    "margins.unity_gain_hz",
    "margins.gain_margin_db",
    "margins.phase_crossover_hz",
    "margins.lower_gain_margin_db",
    "margins.modulus_margin",
    "margins.delay_margin_s",
    "stability.stable",
    "stability.encirclements",
    "stability.open_loop_rhp_poles",
    "stability.closed_loop_rhp_poles",
    "stability.reliable",
    "stability.reasons",
    "loop_gain.freq_hz",
    "loop_gain.re",
    "loop_gain.im",
    "crossovers.gain",
    "crossovers.phase",
    "crossovers.ignored_phase",
    "crossovers.ignored_phase_count",
    "netlist",
    "label",
    "classification",
    "dc_loop_gain_db",
    "peaking.peak_db",
    "second_order_estimate.damping_ratio",
    "second_order_estimate.is_estimate",
    "closed_loop_poles.poles_rad_s",
    "closed_loop_poles.rhp_count",
    "closed_loop_poles.dominant_damping",
    "closed_loop_poles.dominant_q",
    "closed_loop_poles.agrees_with_nyquist",
    "break.side_a",
    "break.side_b",
    "break.driver_terminals",
    "break.load_terminals",
    "break.shunt_terminals",
    "break.decided_by",
    "break.silenced_sources",
    "break.copied_subcircuits",
    "requirements",
    "passed",
    "ignored_statements",
    "warnings",
    "simulation.backend",
    "simulation.points",
    "simulation.refinement_rounds",
    "simulation.refined",
    "simulation.convergence_aid",
    "simulation.deck_path",
    "simulation.seconds",
    "simulation.ngspice_seconds",
    "caution",
    "schema",
    "infinite",
)


def _get(doc: dict, path: str):
    for part in path.split("."):
        assert part in doc, f"missing key {path!r}"
        doc = doc[part]
    return doc


def test_every_required_key_is_present_for_every_kind_of_loop(stable_result, conditional_result, unstable_result, quiet_result):
    """Each documented key exists (possibly null) whether the loop is stable, conditionally stable, unstable or never reaches 0 dB."""
    for result in (stable_result, conditional_result, unstable_result, quiet_result):
        doc = to_document(result)
        for path in REQUIRED:
            _get(doc, path)
        assert doc["schema"] == SCHEMA


def test_no_crossover_gives_null_not_missing(quiet_result):
    """A loop below 0 dB everywhere has null phase margin, crossover frequency, delay margin and estimate, and says it does not regulate."""
    doc = to_document(quiet_result)
    assert doc["classification"] == "does not regulate"
    for key in ("phase_margin_deg", "unity_gain_hz", "gain_margin_db", "phase_crossover_hz", "delay_margin_s", "lower_gain_margin_db"):
        assert doc["margins"][key] is None
        assert f"margins.{key}" not in doc["infinite"]
    assert doc["crossovers"]["gain"] == []
    assert doc["second_order_estimate"]["damping_ratio"] is None
    assert doc["peaking"]["at_worst_crossover_db"] is None


def test_values_equal_the_analysis_record(stable_result):
    """Margins and crossovers in the document are the analysis record's numbers, unchanged."""
    doc = to_document(stable_result)
    a = stable_result.analysis
    assert doc["margins"]["phase_margin_deg"] == a.margins.phase_margin_deg
    assert doc["margins"]["gain_margin_db"] == a.margins.gain_margin_db
    assert doc["margins"]["modulus_margin"] == a.margins.modulus_margin
    assert doc["margins"]["delay_margin_s"] == a.margins.delay_margin_s
    assert [c["freq_hz"] for c in doc["crossovers"]["gain"]] == [c.freq_hz for c in a.gain_crossovers]
    assert [c["gain_margin_db"] for c in doc["crossovers"]["phase"]] == [c.gain_margin_db for c in a.phase_crossovers]
    assert doc["stability"]["stable"] is True and doc["classification"] == "stable"
    assert np.array_equal(np.array(doc["loop_gain"]["re"]) + 1j * np.array(doc["loop_gain"]["im"]), a.t)


def test_document_margins_match_python_control(stable_result):
    """The document's worst PM, GM and modulus margin agree with python-control on the same transfer function."""
    s = control.tf("s")
    loop = 1e4 / ((1 + s / (W * 1e3)) * (1 + s / (W * 3e7)) * (1 + s / (W * 1e8)))
    gm, pm, sm, _, w_gc, _ = control.stability_margins(loop)  # python-control 0.10 stability_margins
    doc = to_document(stable_result)
    assert doc["margins"]["phase_margin_deg"] == pytest.approx(pm, abs=1e-3)
    assert doc["margins"]["gain_margin_db"] == pytest.approx(20 * math.log10(gm), abs=1e-3)
    assert doc["margins"]["modulus_margin"] == pytest.approx(sm, rel=1e-4)
    assert doc["margins"]["unity_gain_hz"] == pytest.approx(w_gc / W, rel=1e-5)


def test_json_dumps_without_nan_and_infinity_noted(unstable_result, quiet_result):
    """json.dumps(allow_nan=False) works, and an infinite value is null with its path listed in `infinite`."""
    doc = to_document(unstable_result)
    text = json.dumps(doc, allow_nan=False)
    assert json.loads(text) == doc
    # the unstable loop's dominant pair has damping < 0, so Q = 1/(2 zeta) is given as inf by the analysis
    assert unstable_result.analysis.poles.dominant_q == math.inf
    assert doc["closed_loop_poles"]["dominant_q"] is None
    assert doc["infinite"]["closed_loop_poles.dominant_q"] == "+inf"
    quiet = to_document(quiet_result)
    json.dumps(quiet, allow_nan=False)
    gm = next(r for r in quiet["requirements"] if r["metric"] == "gm")
    assert gm["value"] is None and gm["passed"] is True  # +inf per the requirements module's documented case
    assert quiet["infinite"][f"requirements[{quiet['requirements'].index(gm)}].value"] == "+inf"


def test_closed_loop_poles_are_pairs_in_rad_s(unstable_result):
    """Poles are [re, im] pairs in rad/s, and their RHP count is the one the Nyquist count gives."""
    doc = to_document(unstable_result)
    poles = np.array(doc["closed_loop_poles"]["poles_rad_s"])
    assert poles.shape[1] == 2
    assert int(np.sum(poles[:, 0] > 0)) == doc["closed_loop_poles"]["rhp_count"] == doc["stability"]["closed_loop_rhp_poles"] == 2


def test_multi_documents_keep_the_loop_shape(stable_result, unstable_result):
    """Several loops nest the per-loop document unchanged, and pass only when every loop passes."""
    loops = multi_document("loops", [stable_result, unstable_result], netlist="x.cir")
    assert loops["loops"][0] == to_document(stable_result)
    assert loops["passed"] is False and loops["netlist"] == "x.cir"
    modes = multi_document("modes", {"differential": stable_result, "common": stable_result})
    assert set(modes["modes"]) == {"differential", "common"} and modes["passed"] is True
    json.dumps(modes, allow_nan=False)
    with pytest.raises(ValueError):
        multi_document("rows", [stable_result])
