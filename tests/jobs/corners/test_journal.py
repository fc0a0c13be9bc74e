"""The results file: complete lines survive a cut, refusal to overwrite, resume truncates a half-written line."""

from __future__ import annotations

import json

import pytest

from netloop.jobs.corners import Setting, apply_settings, read_records
from netloop.jobs.corners.journal import Journal
from netloop.errors import NetloopError


def test_a_line_cut_by_a_kill_is_dropped_and_resume_appends_after_the_last_whole_line(tmp_path):
    """read_records keeps whole JSON lines only; Journal.open(resume=True) cuts the half line so the file stays valid JSONL."""
    path = tmp_path / "r.jsonl"
    whole = [{"record": "corner", "key": "a", "outcome": "pass"}, {"record": "corner", "key": "b", "outcome": "error"}]
    path.write_text("".join(json.dumps(r) + "\n" for r in whole) + '{"record": "corner", "key": "c", "outc')
    records, good = read_records(path)
    assert list(records) == whole
    journal = Journal.open(path, plan="p.toml", total=3, resume=True, force=False)
    assert set(journal.done) == {"a", "b"}
    journal.write(({"record": "corner", "key": "c", "outcome": "pass"},))
    journal.close()
    lines = path.read_text().splitlines()
    assert [json.loads(x)["key"] for x in lines if json.loads(x)["record"] == "corner"] == ["a", "b", "c"]


def test_existing_file_needs_resume_or_force(tmp_path):
    """Without --resume or --force an existing results file is refused and left byte for byte as it was."""
    path = tmp_path / "r.jsonl"
    path.write_text('{"record": "corner", "key": "a"}\n')
    before = path.read_bytes()
    with pytest.raises(NetloopError, match="--resume.*--force"):
        Journal.open(path, plan="p.toml", total=1, resume=False, force=False)
    with pytest.raises(NetloopError, match="contradict"):
        Journal.open(path, plan="p.toml", total=1, resume=True, force=True)
    assert path.read_bytes() == before
    Journal.open(path, plan="p.toml", total=1, resume=False, force=True).close()
    assert b'"key": "a"' not in path.read_bytes()


@pytest.mark.parametrize(
    ("card", "expected"),
    [
        ("Vs a 0 3.3", "Vs a 0 2.5"),
        ("Vs a 0 dc 3.3 ac 1", "Vs a 0 dc 2.5 ac 1"),
        ("Vs a 0 ac 1", "Vs a 0 dc 2.5 ac 1"),
        ("Vs a 0 DC {vdd}", "Vs a 0 DC 2.5"),
        ("Vs a 0 pulse(0 1 1n 1n 1n 5n 10n)", "Vs a 0 dc 2.5 pulse(0 1 1n 1n 1n 5n 10n)"),
    ],
)
def test_supply_setting_writes_the_dc_value_where_ngspice_reads_it(tmp_path, card, expected):
    """A supply setting sets the DC value of each independent-source form (ngspice manual, 'Independent Sources': V N+ N- <DC> VALUE <AC ...> <transient>)."""
    src = tmp_path / "s.cir"
    src.write_text(f"t\n.param vdd=3\n{card}\nR1 a 0 1k\n.end\n")
    nl = apply_settings(str(src), (Setting("supply", "vs", "2.5"),))
    assert nl.element("vs").card() == expected
