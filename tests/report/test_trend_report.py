"""The trend of each corner's worst phase margin over runs, as the table and the JSON document give it."""

from __future__ import annotations

import json

import pytest

from netloop.jobs.runs import read_results, trend_of
from netloop.report.trend import trend_document, trend_table


def _file(path, *corners, started: str | None = None):
    """A results file (invented) with one record per (corner, phase margin, outcome), its run started when ``started`` says."""
    head = {"record": "run", "schema": "netloop.corners/1", "plan": "p.toml", **({"started": started} if started else {})}
    records = [{"record": "corner", "corner": name, "at": "out", "outcome": outcome, "settings": {},
                "loop": {"margins": {"phase_margin_deg": pm}}} for name, pm, outcome in corners]
    path.write_text("".join(json.dumps(r) + "\n" for r in (head, *records)))
    return read_results(path)


@pytest.fixture
def trend(tmp_path):
    """Three runs: ss falls from 52 to 48 deg, tt rises from 65 to 66 deg (absent from the first run), ff vanishes."""
    return trend_of((_file(tmp_path / "1.jsonl", ("ss", 52.0, "pass"), ("ff", 70.0, "pass"), started="2026-12-01T09:30:00+00:00"),
                     _file(tmp_path / "2.jsonl", ("ss", 49.5, "pass"), ("tt", 65.0, "pass")),
                     _file(tmp_path / "3.jsonl", ("ss", 48.0, "fail"), ("tt", 66.0, "pass"))))


def test_the_table_numbers_the_runs_and_signs_the_change_from_first_to_latest(trend):
    """The head numbers the runs from 1; the change column is latest minus first (-4.00 for a fall of 4 deg, +1.00 for a
    rise), and a corner absent from the latest run has none."""
    lines = trend_table(trend).splitlines()
    table = lines[lines.index("") + 1:]
    assert table[0].split() == ["corner", "run", "1", "run", "2", "run", "3", "change"]
    rows = {line.split()[0]: line.split() for line in table[2:]}
    # common practice: a change is the new value less the old one (48 - 52 = -4, 66 - 65 = +1)
    assert rows == {"ss": ["ss", "52.00", "49.50", "48.00", "fail", "-4.00"], "tt": ["tt", "absent", "65.00", "66.00", "+1.00"],
                    "ff": ["ff", "70.00", "absent", "absent", "-"]}


def test_the_document_lists_the_runs_in_order_and_every_corner(trend, tmp_path):
    """The netloop.trend/1 document names each run's file and plan in the order given, and each corner's margins per run."""
    doc = json.loads(json.dumps(trend_document(trend)))
    assert doc["schema"] == "netloop.trend/1"
    assert [(r["file"], r["plan"]) for r in doc["runs"]] == [(str(tmp_path / f"{i}.jsonl"), "p.toml") for i in (1, 2, 3)]
    assert [r["started"] for r in doc["runs"]] == ["2026-12-01T09:30:00+00:00", None, None]  # null where a file does not say
    assert [c["corner"] for c in doc["corners"]] == ["ss", "tt", "ff"]  # the lowest phase margin in the latest run first
    assert doc["corners"][0]["phase_margin_deg"] == [52.0, 49.5, 48.0]
