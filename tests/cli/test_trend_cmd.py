"""`netloop trend` through main(): the table, and the chart written where --plot says."""

from __future__ import annotations

import json

from netloop.cli.main import main


def _results(path, *corners):
    """A results file (invented, as tests/report/test_trend_report.py writes them): one record per (corner, phase margin)."""
    head = {"record": "run", "schema": "netloop.corners/1", "plan": "p.toml"}
    records = [{"record": "corner", "corner": name, "at": "out", "outcome": "pass", "settings": {},
                "loop": {"margins": {"phase_margin_deg": pm}}} for name, pm in corners]
    path.write_text("".join(json.dumps(r) + "\n" for r in (head, *records)))
    return str(path)


def test_plot_writes_the_chart_and_the_table_names_it(tmp_path, capsys):
    """--plot FILE.png writes a PNG chart there and the table ends with the line naming it; the exit status is 0."""
    # Reference: README section 'Baselines and trends' (`netloop trend A B --plot trend.png` draws the chart);
    # the PNG signature is the file format's own (PNG specification, section 5.2).
    first = _results(tmp_path / "a.jsonl", ("ss", 52.0), ("tt", 65.0))
    second = _results(tmp_path / "b.jsonl", ("ss", 48.0), ("tt", 66.0))
    chart = tmp_path / "trend.png"
    assert main(["trend", first, second, "--plot", str(chart)]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[-1] == f"chart: {chart}" and any(line.split()[:3] == ["ss", "52.00", "48.00"] for line in lines)
    assert chart.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
