"""Results files read as the records of a run: the header, the last record of each corner, and file:line for bad ones."""

from __future__ import annotations

import json

import pytest

from netloop.errors import ResultsError
from netloop.jobs.runs import read_results

HEADER = {"record": "run", "schema": "netloop.corners/1", "plan": "/p/plan.toml", "corners": 2, "resumed": False,
          "started": "2026-01-02T03:04:05+00:00"}


def _corner(name: str, pm: float, at: str = "out") -> dict:
    return {"record": "corner", "key": name, "corner": name, "at": at, "outcome": "pass", "settings": {},
            "loop": {"margins": {"phase_margin_deg": pm}}}


def _write(path, *items, tail: str = "") -> str:
    path.write_text("".join(json.dumps(i) + "\n" for i in items) + tail)
    return str(path)


def test_the_last_record_of_a_corner_counts_and_a_cut_last_line_is_left_out(tmp_path):
    """A corner written twice (a resumed file) counts once, by its later record; a last line cut short is ignored."""
    path = _write(tmp_path / "r.jsonl", HEADER, _corner("a", 50.0), _corner("b", 60.0), HEADER, _corner("a", 55.0),
                  tail='{"record": "corner", "cor')
    run = read_results(path)
    assert [(r["corner"], r["loop"]["margins"]["phase_margin_deg"]) for r in run.records] == [("b", 60.0), ("a", 55.0)]
    assert run.replaced == 1 and run.plan == "/p/plan.toml" and run.started.startswith("2026-01-02")


def test_a_results_file_keeps_the_path_it_was_read_from(tmp_path):
    """The run names the file given (as text, whether given as text or a Path) and its name heads columns and legends;
    the reference is the path the test wrote."""
    path = _write(tmp_path / "r.jsonl", HEADER, _corner("a", 50.0))
    assert (read_results(path).path, read_results(tmp_path / "r.jsonl").path) == (path, path)
    assert read_results(path).name == "r.jsonl"


def test_one_corner_at_two_break_nodes_is_two_records(tmp_path):
    """Records are matched by corner and break node: the same corner at two nodes is two loops."""
    run = read_results(_write(tmp_path / "r.jsonl", HEADER, _corner("a", 50.0, "out"), _corner("a", 40.0, "fb")))
    assert [(r["corner"], r["at"]) for r in run.records] == [("a", "out"), ("a", "fb")]


@pytest.mark.parametrize(("lines", "where", "what"), [
    (["not json"], ":1:", "not a results file"),
    ([json.dumps({"record": "corner"})], ":1:", "not a results file"),
    ([json.dumps({**HEADER, "schema": "netloop.yield/1"})], ":1:", "not a results file"),  # a run header of another schema
    ([json.dumps({**HEADER, "record": "corner"})], ":1:", "not a results file"),  # the schema, but no run header
    ([json.dumps(HEADER), "garbage", json.dumps(_corner("a", 1.0))], ":2:", "not a JSON line"),
    ([json.dumps(HEADER), json.dumps({"record": "corner", "corner": "a"})], ":2:", "a corner record without at"),
    ([json.dumps(HEADER), "[1, 2]", json.dumps(_corner("a", 1.0))], ":2:", "not a JSON object"),
    ([], "", "empty"),
])
def test_a_file_that_is_not_a_results_file_is_refused_with_its_line(tmp_path, lines, where, what):
    """Each kind of bad results file is one ResultsError naming the file and line and what was expected."""
    path = tmp_path / "bad.jsonl"
    path.write_text("".join(line + "\n" for line in lines))
    with pytest.raises(ResultsError, match=what) as info:
        read_results(path)
    # file:line: message, or file: message where no line is to blame (the empty file)
    assert str(info.value).startswith(f"{path}{where or ':'} {what}")
