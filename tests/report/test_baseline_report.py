"""A run against its baseline, presented: the table, the regression sentences, the JSON and the JUnit suite."""

from __future__ import annotations

import json
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "jobs" / "runs"))
from ldo_model import CDEC, record, t_of  # noqa: E402

from netloop.jobs.runs import compare_runs, parse_limits  # noqa: E402
from netloop.report.baseline import baseline_document, changes_table, regression_sentence, regression_suite  # noqa: E402
from netloop.report.corner_records import junit_xml  # noqa: E402


@pytest.fixture(scope="module")
def comparison():
    """Three corners at 1 ohm ESR; the new run adds a pole at 20 MHz, which takes most phase margin from the fastest
    corner (100 mA, crossover about 13 MHz); one corner vanished and one is new."""
    def run(pole):
        return [record({"param.iload": i, "param.esr": "1"}, lambda f, i=i: t_of(f, float(i[:-1]) * 1e-3, 1.0, cdec=CDEC, fb_pole_hz=pole))
                for i in ("1m", "10m", "100m")]
    a, b = run(None), run(20e6)
    return compare_runs((*a, record({"param.iload": "3m", "param.esr": "1"}, lambda f: t_of(f, 3e-3, 1.0, cdec=CDEC))),
                        (*b, record({"param.iload": "30m", "param.esr": "1"}, lambda f: t_of(f, 3e-2, 1.0, cdec=CDEC))),
                        parse_limits(["pm=20deg"]), baseline_path="old.jsonl")


def test_the_table_puts_regressions_first_and_says_the_limit(comparison):
    """The changes table lists the regressed corners first, each marked REGRESSION with the limit in words, and the
    sentence gives both values and the fall."""
    (reg,) = comparison.regressions  # about 33 deg at 100 mA (fc 13 MHz), 14 deg at 10 mA, 5 deg at 1 mA: atan(fc / 20 MHz)
    table = changes_table(comparison).splitlines()
    assert table[2].startswith(reg.corner) and "REGRESSION pm (limit: pm may fall by at most 20 deg)" in table[2]
    text = regression_sentence(reg)
    assert f"fell by {reg.before - reg.now:.2f} deg" in text and "more than the 20 deg allowed" in text


def test_junit_carries_the_regressions_in_a_suite_of_their_own(comparison):
    """The JUnit XML has the corners' suite and a "vs baseline" suite: one test case per corner in both runs, a failure
    of type "regression" for the regressed one, new and vanished corners in its output, totals counting both suites."""
    xml = junit_xml((), "ldo", more=[regression_suite(comparison, "ldo")])
    root = ET.fromstring(xml.split("\n", 1)[1])
    suites = root.findall("testsuite")
    assert [s.get("name") for s in suites] == ["ldo", "ldo vs baseline"]
    cases = suites[1].findall("testcase")
    assert len(cases) == 3 and root.get("tests") == "3" and root.get("failures") == "1"
    failed = [c for c in cases if c.find("failure") is not None]
    assert [c.get("name") for c in failed] == [comparison.regressions[0].corner]
    assert failed[0].find("failure").get("type") == "regression"
    out = suites[1].find("system-out").text
    assert "new (not in the baseline): iload=30m/esr=1" in out and "vanished (in the baseline, not in this run): iload=3m/esr=1" in out


def test_the_document_is_json_with_every_change(comparison):
    """The baseline document is plain JSON (no NaN), with each change's figures before and now and the verdict."""
    doc = json.loads(json.dumps(baseline_document(comparison), allow_nan=False))
    assert doc["verdict"] == "fail" and len(doc["changes"]) == 3 and len(doc["regressions"]) == 1
    assert doc["new"] == [{"corner": "iload=30m/esr=1", "at": "fb"}] and doc["vanished"] == [{"corner": "iload=3m/esr=1", "at": "fb"}]
    change = next(c for c in doc["changes"] if c["regressions"])
    pm = change["figures"]["pm"]
    assert pm["change"] == pytest.approx(pm["now"] - pm["before"])


def test_one_regression_reads_in_the_singular_and_nothing_is_skipped(comparison):
    """The summary of a comparison with one regression says "1 regression" with the limit in words and the new and
    vanished counts; the "vs baseline" suite states that nothing was skipped, as the corners' suite does."""
    from netloop.report.baseline import summary_line

    assert summary_line(comparison) == ("against the baseline old.jsonl: 3 of 3 corner(s) in both runs compared, 1 regression beyond "
                                        "the limits (pm may fall by at most 20 deg), 1 new, 1 vanished")
    # JUnit XML (common practice, the Ant/Jenkins schema): a testsuite carries tests, failures, errors and skipped
    suite = regression_suite(comparison, "ldo")
    assert (suite.get("tests"), suite.get("failures"), suite.get("errors"), suite.get("skipped")) == ("3", "1", "0", "0")
    props = {p.get("name"): p.get("value") for p in suite.find("properties")}
    assert props["baseline"] == comparison.baseline and props["limit.pm"] == comparison.limits[0].text  # what it was compared with


@pytest.mark.parametrize("written,reads", [
    ("fc=1MHz", "fc may fall by at most 1.00 MHz"), ("dm=2ns", "dm may fall by at most 2.00 ns"),
    ("peak=0.5dB", "peak may rise by at most 0.5 dB"), ("mm=0.1", "mm may fall by at most 0.1"),
])
def test_a_limit_reads_in_its_figure_s_unit(written, reads):
    """A limit given in the figure's unit reads back in it (README, Baselines and trends: "in the figure's unit (2deg,
    1dB, 1MHz)"); the modulus margin, a ratio, reads as a plain number, not "100 m"."""
    from netloop.jobs.runs.limits import parse_limit
    from netloop.report.baseline import limit_text

    assert limit_text(parse_limit(written)) == reads


def test_a_figure_that_is_gone_is_a_regression_that_says_what_it_was():
    """A figure that existed and is gone (README: a loop that no longer crosses 0 dB is a regression) reads with its
    value before and the limit in words; the modulus margin's regression gives its ratios as the loop report does."""
    from netloop.jobs.runs.baseline import Regression
    from netloop.jobs.runs.limits import parse_limit

    gone = Regression("iload=1m/esr=1", "fb", "fc", 5.02e6, None, parse_limit("fc=10%"))
    assert regression_sentence(gone) == "iload=1m/esr=1: crossover was 5.02 MHz and is gone now (limit: fc may fall by at most 10 %)"
    fell = Regression("iload=1m/esr=1", "fb", "mm", 0.767, 0.617, parse_limit("mm=0.1"))
    # 0.767 - 0.617 = 0.150 by hand; three decimals as the text report's "modulus margin 0.767"
    assert regression_sentence(fell) == ("iload=1m/esr=1: modulus margin fell by 0.150 (0.767 -> 0.617), more than the 0.1 "
                                         "allowed")
