"""Corner outcomes: the table worst first with counts, the corner CSV, and JUnit XML with the right counts."""

from __future__ import annotations

import csv
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from report_loops import W

from netloop.report import CORNER_COLUMNS, CornerOutcome, corner_document, corner_table, junit_xml, write_corner_csv


def _rhp_roots_of_unstable_loop() -> int:
    """Right-half-plane roots of den + num for 1e4 / ((1 + s/w1)(1 + s/w2)(1 + s/w3)), by numpy.roots."""
    den = np.polymul(np.polymul([1 / (W * 1e3), 1], [1 / (W * 1e6), 1]), [1 / (W * 2e6), 1])
    char = den + np.array([0, 0, 0, 1e4])
    return int(np.sum(np.roots(char).real > 0))


@pytest.fixture
def outcomes(stable_result, unstable_result, conditional_result, quiet_result):
    return [
        CornerOutcome("tt_27c", stable_result),
        CornerOutcome("ff_m40c", unstable_result),
        CornerOutcome("ss_125c", conditional_result),
        CornerOutcome("fs_0c", None, "ngspice: timestep too small at 1.2 ns\n(more output)"),
        CornerOutcome("sf_27c", quiet_result),
    ]


def test_table_sorts_worst_first_and_counts(outcomes):
    """The error comes first, then the unstable corner, then the failed requirement, then passes by rising phase margin."""
    assert _rhp_roots_of_unstable_loop() == 2  # numpy.roots of the closed-loop characteristic polynomial: unstable
    lines = corner_table(outcomes).splitlines()
    order = [line.split()[0] for line in lines[2:-1]]
    assert order == ["fs_0c", "ff_m40c", "sf_27c", "tt_27c", "ss_125c"]
    assert "ERROR" in lines[2] and "timestep too small" in lines[2]
    assert "UNSTABLE" in lines[3] and "2 RHP pole(s)" in lines[3]
    assert lines[-1].startswith("5 corner(s): 2 pass, 2 fail (1 unstable, 1 failed requirement), 1 simulation error(s)")


def test_junit_xml_parses_and_counts(outcomes):
    """The JUnit XML parses, has one testcase per corner, and counts 2 failures and 1 error in both count attributes."""
    root = ET.fromstring(junit_xml(outcomes, "front_end").encode("utf-8"))
    suite = root.find("testsuite")
    for node in (root, suite):
        assert (node.get("tests"), node.get("failures"), node.get("errors")) == ("5", "2", "1")
    cases = {c.get("name"): c for c in suite.findall("testcase")}
    assert set(cases) == {"tt_27c", "ff_m40c", "ss_125c", "fs_0c", "sf_27c"}
    assert cases["ff_m40c"].find("failure").get("type") == "unstable"
    assert cases["sf_27c"].find("failure").get("type") == "requirement"
    assert cases["fs_0c"].find("error") is not None and cases["fs_0c"].find("failure") is None
    assert cases["tt_27c"].find("failure") is None and cases["tt_27c"].find("error") is None
    assert "PASS" in cases["tt_27c"].find("system-out").text
    props = {p.get("name"): float(p.get("value")) for p in cases["tt_27c"].iter("property")}
    assert props["phase_margin_deg"] == outcomes[0].result.analysis.margins.phase_margin_deg
    assert "phase_margin_deg" not in {p.get("name") for p in cases["sf_27c"].iter("property")}  # no crossover, no property


def test_corner_csv_and_document(tmp_path, outcomes, stable_result):
    """The corner CSV has one row per corner with the analysis' margins, empty cells for what does not exist."""
    with write_corner_csv(outcomes, tmp_path / "corners.csv").open(newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert tuple(rows[0]) == CORNER_COLUMNS
    by = {r["corner"]: r for r in rows}
    assert float(by["tt_27c"]["phase_margin_deg"]) == stable_result.analysis.margins.phase_margin_deg
    assert by["sf_27c"]["phase_margin_deg"] == "" and by["fs_0c"]["verdict"] == "error"
    assert by["ff_m40c"]["closed_loop_rhp_poles"] == "2"
    doc = corner_document(outcomes)
    assert doc["counts"] == {"error": 1, "inconclusive": 0, "unstable": 1, "fail": 1, "pass": 2} and doc["passed"] is False
    assert doc["corners"][3]["loop"] is None


def test_outcome_needs_exactly_one_of_result_and_error(stable_result):
    """A CornerOutcome with both a result and an error (or neither) is refused."""
    with pytest.raises(ValueError):
        CornerOutcome("x", stable_result, "boom")
    with pytest.raises(ValueError):
        CornerOutcome("x", None, None)
