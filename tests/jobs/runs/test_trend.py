"""The worst phase margin of each corner over several runs."""

from __future__ import annotations

import json

from netloop.jobs.runs import read_results, trend_of

HEADER = {"record": "run", "schema": "netloop.corners/1", "plan": "p.toml"}


def _corner(name, at, pm, outcome="pass"):
    loop = None if outcome == "error" else {"margins": {"phase_margin_deg": pm}}
    return {"record": "corner", "corner": name, "at": at, "outcome": outcome, "settings": {}, "loop": loop}


def _file(path, *records):
    path.write_text("".join(json.dumps(r) + "\n" for r in (HEADER, *records)))
    return read_results(path)


def test_each_run_gives_the_lowest_phase_margin_over_a_corners_break_nodes(tmp_path):
    """A corner measured at two break nodes counts with its lower phase margin; a corner missing from a run is absent
    there; an error has no phase margin and the outcome says so; the change is latest minus first."""
    one = _file(tmp_path / "1.jsonl", _corner("ss", "out", 60.0), _corner("ss", "fb", 52.0), _corner("ff", "out", 70.0))
    two = _file(tmp_path / "2.jsonl", _corner("ss", "out", 58.0), _corner("ss", "fb", 49.5), _corner("tt", "out", 65.0))
    three = _file(tmp_path / "3.jsonl", _corner("ss", "out", 0.0, "error"), _corner("ss", "fb", 48.0), _corner("tt", "out", 66.0))
    trend = trend_of((one, two, three))
    rows = {r.corner: r for r in trend.rows}
    assert rows["ss"].phase_margin_deg == (52.0, 49.5, 48.0) and rows["ss"].outcomes == ("pass", "pass", "error")
    assert rows["ss"].latest_drop_deg == 4.0
    assert rows["ff"].phase_margin_deg == (70.0, None, None) and rows["ff"].outcomes == ("pass", "", "")
    assert rows["tt"].phase_margin_deg == (None, 65.0, 66.0) and rows["tt"].latest_drop_deg == -1.0


def test_the_worst_outcome_of_a_corners_break_nodes_counts_whatever_their_order(tmp_path):
    """A corner's outcome in a run is the worst of its break nodes' (error, then inconclusive, then fail, then pass), not
    the first one's: pass then fail is fail, inconclusive then error is error, fail then inconclusive is inconclusive.
    A corner with no measured record has no phase margin (None), whatever the others' outcomes."""
    run = _file(tmp_path / "1.jsonl",
                _corner("a", "out", 60.0), _corner("a", "fb", 40.0, "fail"),
                _corner("b", "out", 0.0, "inconclusive"), _corner("b", "fb", 0.0, "error"),
                _corner("c", "out", 55.0, "fail"), _corner("c", "fb", 50.0, "inconclusive"),
                _corner("d", "out", 0.0, "error"))
    rows = {r.corner: r for r in trend_of((run,)).rows}
    assert {name: row.outcomes for name, row in rows.items()} == {"a": ("fail",), "b": ("error",), "c": ("inconclusive",),
                                                                   "d": ("error",)}
    # an inconclusive record's figures are not used (netloop.jobs.runs.figures.measured): c's worst is its fail at out
    assert rows["a"].phase_margin_deg == (40.0,) and rows["c"].phase_margin_deg == (55.0,)
    assert rows["b"].phase_margin_deg == (None,) and rows["d"].phase_margin_deg == (None,)


def test_the_latest_drop_reads_the_first_known_margin_and_the_last_run():
    """TrendRow.latest_drop_deg: the first run's known phase margin less the last run's; None when the last run has none
    or fewer than two runs have one (a corner new in the last run has no drop)."""
    from netloop.jobs.runs.trend import TrendRow

    cases = {(None, 62.0, 60.5, 59.0): 3.0, (62.0, None, 59.0): 3.0, (62.0, 59.0, None): None, (None, None, 59.0): None,
             (59.0,): None, (60.0, 61.0): -1.0, (58.0, 61.0, 60.0): -2.0}
    assert {pms: TrendRow("tt", pms, ("pass",) * len(pms)).latest_drop_deg for pms in cases} == cases
