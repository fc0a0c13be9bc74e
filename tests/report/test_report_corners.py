"""Corner outcomes: the table worst first with counts, the corner CSV, and JUnit XML with the right counts; an
inconclusive corner is never counted or shown as a pass, and a passing loop that does not regulate says so."""

from __future__ import annotations

import csv
import math
import re
import xml.etree.ElementTree as ET

import control
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
def outcomes(stable_result, unstable_result, conditional_result, quiet_result, inconclusive_result, quiet_free_result):
    return [
        CornerOutcome("tt_27c", stable_result),
        CornerOutcome("ff_m40c", unstable_result),
        CornerOutcome("ss_125c", conditional_result),
        CornerOutcome("fs_0c", None, "ngspice: timestep too small at 1.2 ns\n(more output)"),
        CornerOutcome("sf_27c", quiet_result),
        CornerOutcome("fs_27c", inconclusive_result),
        CornerOutcome("tt_0c", quiet_free_result),
    ]


def test_table_sorts_worst_first_and_counts(outcomes):
    """The error comes first, then the inconclusive corner, the unstable one, the failed requirement, then passes by rising
    phase margin (none first); the inconclusive corner names its failed self-check and a loop that does not regulate says so."""
    assert _rhp_roots_of_unstable_loop() == 2  # numpy.roots of the closed-loop characteristic polynomial: unstable
    lines = corner_table(outcomes).splitlines()
    rows = {line.split()[0]: line for line in lines[2:-2]}
    assert list(rows) == ["fs_0c", "fs_27c", "ff_m40c", "sf_27c", "tt_0c", "tt_27c", "ss_125c"]
    assert "error" in rows["fs_0c"] and "not measured" in rows["fs_0c"]
    assert "inconclusive" in rows["fs_27c"] and "self-check falls-at-top failed" in rows["fs_27c"] and "pass" not in rows["fs_27c"]
    assert "unstable" in rows["ff_m40c"] and "2 RHP pole(s); pm>=45" in rows["ff_m40c"]
    assert " pass " in rows["tt_0c"] and "does not regulate" in rows["tt_0c"]
    assert lines[-1] == "7 loops measured (7 corners at 2 break nodes): 3 pass, 1 fail a requirement, 1 unstable, 1 inconclusive (no verdict), 1 error (not measured)"
    from netloop.report import corner_summary  # the counts line alone, for a caller that prints its own table

    assert corner_summary(outcomes) == lines[-1]


def test_each_corners_verdict_and_record_are_those_a_corner_run_stores(outcomes):
    """A CornerOutcome's verdict is its record's (netloop.report.corner_records.verdict: error, inconclusive, unstable,
    fail, pass) and passed only for pass; its record has the keys a worker writes for a corner (netloop.jobs.corners),
    so the tables read a `netloop check` loop and a stored corner alike."""
    from netloop.jobs.corners.runner import _lost
    from netloop.jobs.corners.expand import Corner, Task

    verdicts = {o.label: o.verdict for o in outcomes}
    assert verdicts == {"tt_27c": "pass", "ff_m40c": "unstable", "ss_125c": "pass", "fs_0c": "error", "sf_27c": "fail",
                        "fs_27c": "inconclusive", "tt_0c": "pass"}
    assert {o.label for o in outcomes if o.passed} == {"tt_27c", "ss_125c", "tt_0c"}
    stored = set(_lost(Task(Corner("c", "x.cir", (), 1), "out", "k"), RuntimeError("lost"))[0])  # a corner record as stored
    for o in outcomes:
        record = o.record
        assert set(record) <= stored and {"corner", "at", "outcome", "loop", "error", "settings", "seconds", "simulator_output"} <= set(record)
        assert (record["settings"], record["simulator_output"]) == ({}, None)
        assert record["seconds"] == (0.0 if o.result is None else o.result.sim.seconds)  # an error spent no simulation time


def test_junit_xml_parses_and_counts(outcomes):
    """The JUnit XML parses, has one testcase per corner, and counts the unstable, failed and inconclusive corners as
    failures (3) and the unmeasured one as an error, in both count attributes; nothing is skipped."""
    root = ET.fromstring(junit_xml(outcomes, "front_end").encode("utf-8"))
    assert root.tag == "testsuites" and root.get("name") == "front_end"  # the JUnit root CI tools read
    suite = root.find("testsuite")
    for node in (root, suite):
        assert (node.get("tests"), node.get("failures"), node.get("errors")) == ("7", "3", "1")
    assert suite.get("skipped") == "0" and not suite.findall(".//skipped")
    cases = {c.get("name").split(" at ")[0]: c for c in suite.findall("testcase")}
    assert set(cases) == {"tt_27c", "ff_m40c", "ss_125c", "fs_0c", "sf_27c", "fs_27c", "tt_0c"}
    assert cases["ff_m40c"].find("failure").get("type") == "unstable"
    assert cases["sf_27c"].find("failure").get("type") == "requirement"
    doubt = cases["fs_27c"].find("failure")
    assert doubt.get("type") == "inconclusive" and "sweep ends at" in doubt.get("message") and "try:" in doubt.text
    assert cases["fs_0c"].find("error") is not None and cases["fs_0c"].find("failure") is None
    for name in ("tt_27c", "tt_0c"):
        assert cases[name].find("failure") is None and cases[name].find("error") is None
    assert "PASS" in cases["tt_27c"].find("system-out").text
    for case in cases.values():  # parts joined by "; ", none left dangling when a corner has no settings
        out = case.find("system-out")
        assert out is None or not out.text.endswith((";", " "))
    assert "does not regulate" in cases["tt_0c"].find("system-out").text
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
    assert (by["tt_27c"]["seconds"], by["fs_0c"]["seconds"]) == ("0.010", "0.000")  # report_loops' SimInfo: 0.01 s; an error spent none
    assert by["sf_27c"]["phase_margin_deg"] == "" and by["fs_0c"]["verdict"] == "error"
    assert by["ff_m40c"]["closed_loop_rhp_poles"] == "2"
    assert by["fs_27c"]["verdict"] == "inconclusive" and by["fs_27c"]["failed_checks"] == "falls-at-top"
    assert by["tt_0c"]["verdict"] == "pass" and "does not regulate" in by["tt_0c"]["notes"]
    doc = corner_document(outcomes)
    assert doc["counts"] == {"error": 1, "inconclusive": 1, "unstable": 1, "fail": 1, "pass": 3} and doc["passed"] is False
    assert doc["corners"][3]["loop"] is None
    assert [(c["label"], c["verdict"]) for c in doc["corners"]] == [(o.label, o.verdict) for o in outcomes]  # in the plan's order


def test_inconclusive_corners_alone_are_not_a_pass(stable_result, inconclusive_result):
    """A run whose only doubt is an inconclusive corner is "inconclusive", not passed, in the document and the counts."""
    doc = corner_document([CornerOutcome("tt", stable_result), CornerOutcome("fs", inconclusive_result)])
    assert (doc["verdict"], doc["passed"]) == ("inconclusive", False)
    assert corner_table([CornerOutcome("fs", inconclusive_result)]).rstrip().endswith("1 inconclusive (no verdict), 0 error (not measured)")


def test_outcome_needs_exactly_one_of_result_and_error(stable_result):
    """A CornerOutcome with both a result and an error (or neither) is refused."""
    with pytest.raises(ValueError):
        CornerOutcome("x", stable_result, "boom")
    with pytest.raises(ValueError):
        CornerOutcome("x", None, None)


def test_the_table_row_gives_the_gain_margin_and_crossover_and_the_note_word_for_word(outcomes):
    """The passing two-stage corner's row gives python-control's phase margin, gain margin and crossover (67.03 deg,
    22.28 dB, 9.49 MHz), and the loop that never reaches 0 dB carries the note "does not regulate (|T| < 0 dB throughout)"
    as written."""
    s = control.tf("s")
    gm, pm, _, _, w_gc, _ = control.stability_margins(1e4 / ((1 + s / (W * 1e3)) * (1 + s / (W * 3e7)) * (1 + s / (W * 1e8))))
    rows = {line.split()[0]: line for line in corner_table(outcomes).splitlines()[2:-2]}
    # python-control 0.10 stability_margins on the same T(s)
    assert re.search(rf"^tt_27c +xamp.n5 +{pm:.2f} deg +{20 * math.log10(gm):.2f} dB +{w_gc / W / 1e6:.2f} MHz +pass", rows["tt_27c"])
    assert re.search(r" pass +does not regulate \(\|T\| < 0 dB throughout\)$", rows["tt_0c"])


@pytest.mark.parametrize("loads,at,line", [
    ((3, 0, 0, 0), "fb", "circuit loads: 3 for 4 corners; 3 ran on a circuit another corner had loaded, with its temperature, supplies, "
                         "parameters or element values changed in place (share_loads)"),
    ((1, 1), "fb", "circuit loads: 2 for 2 corners"),
    ((None, None), "fb", None),
])
def test_the_loads_line_counts_the_circuits_loaded_and_those_shared(loads, at, line):
    """The loads line sums the records' circuit loads and counts the corners that ran on a circuit another had loaded
    (loads 0); records that do not say give no line."""
    from netloop.report.corner_records import loads_line

    records = tuple({"corner": f"c{i}", "at": at, "loads": n} for i, n in enumerate(loads))
    assert loads_line(records) == line  # common practice: counts of the records as they are


def test_a_corner_not_measured_without_a_message_still_says_so():
    """An error record whose error text is empty (an exception raised with no message) reads "not measured"."""
    from netloop.report.corner_records import reasons

    assert reasons({"corner": "tt", "at": "out", "outcome": "error", "error": "", "loop": None}) == ["not measured"]
