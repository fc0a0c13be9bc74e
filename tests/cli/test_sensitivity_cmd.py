"""`netloop sensitivity`: the summary, the JSON document, the chart and the HTML report, and the exit status."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from netloop.cli.main import main

ROOT = Path(__file__).resolve().parents[2]
REF = str(ROOT / "circuits" / "ref_buffer.cir")
ARGS = ["sensitivity", REF, "--at", "out", "--knob", "cc", "--knob", "cl", "--knob", "m6:w", "--require", "pm>=65", "--solve", "cc"]


@pytest.fixture(scope="module")
def outputs(tmp_path_factory):
    """One run with every output: (exit status, JSON document, chart path, report path, the printed text)."""
    folder = tmp_path_factory.mktemp("sens")
    plot, page = folder / "rank.png", folder / "report.html"
    import contextlib  # noqa: PLC0415
    import io  # noqa: PLC0415

    buffer = io.StringIO()
    with contextlib.redirect_stdout(buffer):
        status = main([*ARGS, "--json", "--plot", str(plot), "--report", str(page)])
    return status, json.loads(buffer.getvalue()), plot, page, buffer.getvalue()


@pytest.mark.ngspice
def test_json_document_has_the_documented_keys(outputs):
    """The JSON document is schema netloop.sensitivity/1 with the ranking, the what-if and the measured loop's document."""
    status, doc, _, _, _ = outputs
    assert status == 1  # the measured loop fails pm>=65, as `netloop check` would say
    assert doc["schema"] == "netloop.sensitivity/1" and doc["loop"]["schema"] == "netloop.loop/1"
    assert [s["knob"] for s in doc["sensitivities"]][:2] == ["cc", "cl"]
    cc = doc["sensitivities"][0]
    for key in ("pm_deg_per_decade", "pm_error_deg_per_decade", "gm_db_per_decade", "fc_hz_per_decade", "peak_db_per_decade", "value", "unit", "probes"):
        assert key in cc
    assert [p["scale"] for p in cc["probes"]] == pytest.approx([math.exp(0.01), math.exp(-0.01), math.exp(0.02), math.exp(-0.02)])
    (w,) = doc["what_ifs"]
    assert w["knob"] == "cc" and w["confirmed"] and w["check"]["requirement_met"]
    assert w["check"]["phase_margin_deg"] == pytest.approx(65.0, abs=0.01)
    assert len(doc["caution"]) == 2 and "local" in doc["caution"][0]


@pytest.mark.ngspice
def test_chart_and_report_are_written(outputs):
    """--plot writes a PNG and --report one self-contained page holding the ranking section and the loop's own section."""
    _, _, plot, page, _ = outputs
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    html = page.read_text()
    assert '<section id="sensitivity">' in html and "What sets the margins" in html and "data:image/png;base64," in html
    assert html.index('id="sensitivity"') < html.index("Loop broken at out")
    assert "http://" not in html and "https://" not in html


@pytest.mark.ngspice
def test_summary_ranks_and_cautions(capsys):
    """The text summary starts with the loop's verdict, ranks cc first, gives the what-if and ends with both cautions."""
    assert main(["sensitivity", REF, "--at", "out", "--knob", "cl", "--knob", "cc"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].startswith("PASS")
    row = next(i for i, line in enumerate(lines) if line.split()[:2] == ["rank", "knob"])
    assert lines[row + 2].split()[:2] == ["1", "cc"] and lines[row + 3].split()[:2] == ["2", "cl"]
    assert lines[-2].startswith("caution: Sensitivities are local") and lines[-1].startswith("caution: Small-signal margins")


@pytest.mark.ngspice
def test_json_document_is_printed_two_spaces_indented(outputs):
    """--json prints the document one key a line, indented by 2 as every other netloop command prints its own, so that
    two saved documents compare line by line."""
    # Reference: netloop/cli/*.py: check, compare, corners, loops, trend and yield print json.dumps(doc, indent=2).
    _, doc, _, _, text = outputs
    assert text == json.dumps(doc, indent=2) + "\n"


@pytest.mark.parametrize(("option", "path", "message"), [
    ("--plot", "missing/rank.png", "cannot write the sensitivity chart to '{path}': No such file or directory"),
    ("--report", "missing/page.html", "cannot write the HTML report to '{path}': No such file or directory"),
])
def test_an_output_that_cannot_be_written_is_refused_before_any_simulation(tmp_path, monkeypatch, capsys, option, path, message):
    """A --plot or --report file whose folder does not exist is one error line naming the file by what it is (the
    ranking chart, as netloop.report.sensitivity_plot calls it when it writes it) and exit status 2, before any knob runs."""
    # Reference: netloop/errors.py contract (NetloopError -> one line, exit 2); the README's rule that a file that cannot
    # be written is refused before the long work.
    import netloop.jobs.sensitivity

    def no_simulation(*args, **kwargs):
        raise AssertionError("the knobs ran although an output cannot be written")

    monkeypatch.setattr(netloop.jobs.sensitivity, "sensitivities", no_simulation)
    target = str(tmp_path / path)
    assert main(["sensitivity", REF, "--at", "out", option, target]) == 2
    err = capsys.readouterr().err
    assert err.splitlines() == [err.strip()] and message.format(path=target) in err


def test_help_names_the_netlist_and_the_chart_file(capsys):
    """--help says the netlist is never modified (README, "The netlist itself is never modified") and shows --plot
    taking FILE, the name its help text uses for the chart's file."""
    with pytest.raises(SystemExit):
        main(["sensitivity", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "netlist the netlist file (ngspice syntax); it is never modified" in text
    assert "--plot FILE write the ranking chart (FILE.png, .svg or .pdf)" in text
