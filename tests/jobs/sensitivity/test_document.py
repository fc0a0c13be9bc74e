"""The JSON document of a sensitivity run holds the keys docs/sensitivity-json.md lists, each with the run's own value.

The run is the two-pole loop of test_sensitivity_closed_form (its slopes and solved C2 are checked against the closed
form there): two knobs, pm>=60 solved with C2, so every part of the document (slopes, probes, a what-if and its fresh
check) is filled. The reference for the keys is the schema's text itself, read here from its tables.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest
from test_sensitivity_closed_form import TWO_POLE

from netloop.jobs.sensitivity import sensitivities
from netloop.jobs.sensitivity.document import SENSITIVITY_SCHEMA, sensitivity_document
from netloop.sim import SharedLibrarySimulator

SCHEMA_DOC = Path(__file__).resolve().parents[3] / "docs" / "sensitivity-json.md"


def _tables() -> tuple[dict[str, str], dict[str, str], dict[str, str]]:
    """{key: meaning} of the document's three tables: the top level, a sensitivities[] entry, a what_ifs[] entry
    (a row naming several keys, `a`, `b`, gives each the row's meaning)."""
    text = SCHEMA_DOC.read_text()
    top, rest = text.split("Each `sensitivities[]` entry:")
    sens, what = rest.split("Each `what_ifs[]` entry:")
    tables = []
    for part in (top, sens, what):
        rows = {}
        for line in part.splitlines():
            cells = [c.strip() for c in line.strip().strip("|").split(" | ")]
            if line.startswith("| `") and len(cells) == 2:
                rows.update({key: cells[1] for key in re.findall(r"`([^`]+)`", cells[0])})
        tables.append(rows)
    return tables[0], tables[1], tables[2]


def _names(text: str) -> list[str]:
    return re.findall(r"`([^`]+)`", text)


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    path = tmp_path_factory.mktemp("document") / "two_pole.cir"
    path.write_text(TWO_POLE)
    with SharedLibrarySimulator() as simulator:
        return sensitivities(path, "out", knobs=["c2", "r2"], requirements=["pm>=60"], solve=["c2"], simulator=simulator)


@pytest.mark.ngspice
def test_the_keys_are_those_the_schema_lists(run):
    """Top level (step.* as the nested ``step``), each sensitivity, its probes, each what-if and its check: the keys of
    docs/sensitivity-json.md, no more and no fewer."""
    top, sens, what = _tables()
    doc = json.loads(json.dumps(sensitivity_document(run), allow_nan=False))
    assert set(doc) == {key.split(".")[0].removesuffix("[]") for key in top}
    assert set(doc["step"]) == {key.split(".")[1] for key in top if key.startswith("step.")}
    sens_keys = {key.removesuffix("[]") for key in sens}
    probe_keys = set(_names(sens["probes[]"].split(": ", 1)[1].split(". ")[0]))  # "the four changed values: `scale`, ..."
    check_text = what["check"].split(": ", 1)[1].split("; `null`")[0]  # "`phase_margin_deg`, ..., `requirements[]` (`text`, ...)"
    outer, inner = check_text.split(" (", 1)
    assert len(doc["sensitivities"]) == 2 and len(doc["what_ifs"]) == 1
    for entry in doc["sensitivities"]:
        assert set(entry) == sens_keys
        assert all(set(p) == probe_keys for p in entry["probes"]) and len(entry["probes"]) == 4
    w = doc["what_ifs"][0]
    assert set(w) == {key.removesuffix("[]") for key in what}
    assert set(w["check"]) == {key.removesuffix("[]") for key in _names(outer)}
    assert all(set(r) == set(_names(inner)) for r in w["check"]["requirements"]) and w["check"]["requirements"]


@pytest.mark.ngspice
def test_the_values_are_the_runs_own(run):
    """Each key holds what the run's records say (records.Sensitivity, records.WhatIf, the fresh check's LoopResult), the
    location is the card's line in the netlist, and the step's words are the formulas of records.Slope."""
    doc = sensitivity_document(run)
    assert doc["schema"] == SENSITIVITY_SCHEMA == "netloop.sensitivity/1"
    assert doc["step"]["difference"] == "central, (F(x e^h) - F(x e^-h)) / (2h) * ln 10 per decade"
    assert doc["step"]["error_estimate"] == "|D(h) - D(2h)| / 3"
    lines = TWO_POLE.splitlines()
    for rank, (entry, s) in enumerate(zip(doc["sensitivities"], run.sensitivities, strict=True), start=1):
        card = next(i for i, line in enumerate(lines, start=1) if line.lower().startswith(s.knob.element + " "))
        assert (entry["rank"], entry["knob"], entry["value"]) == (rank, s.knob.name, s.value)
        assert entry["location"] == f"{s.knob.location.file}:{card}" and entry["location"].endswith(f"two_pole.cir:{card}")
        for figure, unit in (("pm", "deg"), ("gm", "db"), ("fc", "hz"), ("peak", "db")):
            assert entry[f"{figure}_{unit}_per_decade"] == s.slope(figure).per_decade
            assert entry[f"{figure}_error_{unit}_per_decade"] == s.slope(figure).error
        assert entry["pm_deg_per_decade"] is not None and entry["gm_db_per_decade"] is None  # no phase crossover: no GM
        assert entry["whole_sweeps"] == sum(p["whole_sweep"] for p in entry["probes"]) == s.whole_sweeps
        assert entry["problem"] is None is s.problem
    w, record = doc["what_ifs"][0], run.what_ifs[0]
    margins = record.check.analysis.margins
    assert w["check"]["phase_margin_deg"] == margins.phase_margin_deg == pytest.approx(60.0, abs=1e-3)
    assert (w["check"]["unity_gain_hz"], w["check"]["peak_db"]) == (margins.unity_gain_hz, record.check.analysis.peaking.peak_db)
    assert w["check"]["requirement_met"] is True is w["confirmed"]
    assert [r["passed"] for r in w["check"]["requirements"]] == [True]
