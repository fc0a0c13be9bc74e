"""Corner outcomes as JUnit XML, for CI dashboards: one testcase per corner.

    <testsuites tests= failures= errors=>
      <testsuite name=SUITE tests= failures= errors= skipped="0" time=>
        <testcase classname=SUITE name=CORNER time=SECONDS>
          <failure type="unstable"|"requirement" message=...>details</failure>   a corner that fails
          <error type="simulation" message=...>the error text</error>             a corner with no result
          <properties><property name="phase_margin_deg" value=.../> ...</properties>   the margins that exist
          <system-out>the text summary of the loop</system-out>
"""

from __future__ import annotations

import xml.etree.ElementTree as ET
from collections.abc import Iterable

from netloop.report.corners import CornerOutcome
from netloop.report.text import format_text, requirement_text, verdict_line

__all__ = ["junit_xml"]


def _case(suite_name: str, o: CornerOutcome) -> ET.Element:
    seconds = 0.0 if o.result is None else o.result.sim.seconds
    case = ET.Element("testcase", classname=suite_name, name=o.label, time=f"{seconds:.3f}")
    if o.result is None:
        err = ET.SubElement(case, "error", type="simulation", message=(o.error or "").splitlines()[0] if o.error else "")
        err.text = o.error or ""
        return case
    props = ET.SubElement(case, "properties")
    m = o.result.analysis.margins
    for name in ("phase_margin_deg", "unity_gain_hz", "gain_margin_db", "lower_gain_margin_db", "modulus_margin", "delay_margin_s"):
        value = getattr(m, name)
        if value is not None:  # a margin that does not exist is left out
            ET.SubElement(props, "property", name=name, value=repr(float(value)))
    verdict = o.verdict
    if verdict != "pass":
        details = [requirement_text(r) for r in o.result.failed_requirements]
        fail = ET.SubElement(
            case, "failure", type="unstable" if verdict == "unstable" else "requirement", message=verdict_line(o.result)
        )
        fail.text = "\n".join([verdict_line(o.result), *details])
    ET.SubElement(case, "system-out").text = format_text(o.result)
    return case


def junit_xml(outcomes: Iterable[CornerOutcome], suite_name: str) -> str:
    """The JUnit XML document (a string with an XML declaration) of a corner run named suite_name."""
    outcomes = list(outcomes)
    cases = [_case(suite_name, o) for o in outcomes]
    counts = {
        "tests": str(len(outcomes)),
        "failures": str(sum(o.verdict in ("unstable", "fail") for o in outcomes)),
        "errors": str(sum(o.verdict == "error" for o in outcomes)),
    }
    total = sum(0.0 if o.result is None else o.result.sim.seconds for o in outcomes)
    root = ET.Element("testsuites", name=suite_name, **counts, time=f"{total:.3f}")
    suite = ET.SubElement(root, "testsuite", name=suite_name, **counts, skipped="0", time=f"{total:.3f}")
    suite.extend(cases)
    ET.indent(root)
    return ET.tostring(root, encoding="unicode", xml_declaration=True) + "\n"
