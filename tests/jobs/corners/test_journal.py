"""The results file: complete lines survive a cut, refusal to overwrite, resume truncates a half-written line."""

from __future__ import annotations

import json

import pytest

from netloop.jobs.corners import Setting, apply_settings, read_records
from netloop.jobs.corners.journal import Journal, fingerprints
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


def test_a_whole_line_that_is_not_json_ends_the_good_part(tmp_path):
    """read_records stops at a line that ends in a newline but is not JSON: the records before it, and their byte length."""
    path = tmp_path / "r.jsonl"
    whole = "".join(json.dumps({"record": "corner", "key": k, "outcome": "pass"}) + "\n" for k in "ab")
    # reference: the file written by hand, a record cut short and a later whole line after it
    path.write_text(whole + '{"record": "corner", "ke\n' + json.dumps({"record": "corner", "key": "c"}) + "\n")
    records, good = read_records(path)
    assert [r["key"] for r in records] == ["a", "b"] and good == len(whole.encode())


def test_a_file_that_cannot_be_read_is_fingerprinted_missing(tmp_path):
    """fingerprints gives each readable file the SHA-256 of its bytes (hashlib, FIPS 180-4) and a file that cannot be read
    the word "missing", which the results file shows."""
    import hashlib

    there = tmp_path / "m.lib"
    there.write_bytes(b".lib tt\n.endl\n")
    gone = tmp_path / "gone.lib"
    assert fingerprints([str(gone), str(there)]) == {str(gone): "missing", str(there): hashlib.sha256(there.read_bytes()).hexdigest()}


def test_closing_a_results_file_twice_is_harmless(tmp_path):
    """A second close of a journal does nothing, as a second close of a Python file object (common practice)."""
    journal = Journal.open(tmp_path / "r.jsonl", plan="p.toml", total=1, resume=False, force=False)
    journal.write(({"record": "corner", "key": "a", "outcome": "pass"},))
    journal.close()
    journal.close()
    assert [r.get("key") for r in read_records(tmp_path / "r.jsonl")[0]] == [None, "a"]


def test_resume_keeps_every_record_of_a_task_from_the_last_run_that_wrote_it(tmp_path):
    """A task with one record a loop keeps all of them on resume, and a later run's records of a task replace an earlier run's."""
    path = tmp_path / "r.jsonl"
    first = [{"record": "corner", "key": "a", "at": "u1", "outcome": "fail"}, {"record": "corner", "key": "a", "at": "u2", "outcome": "pass"},
             {"record": "corner", "key": "b", "at": "u1", "outcome": "pass"}]
    second = [{"record": "corner", "key": "a", "at": "u1", "outcome": "pass"}, {"record": "corner", "key": "a", "at": "u2", "outcome": "pass"}]
    # reference: the file written by hand, two runs (a run record opens each), task a measured again in the second
    path.write_text("".join(json.dumps(r) + "\n" for r in [{"record": "run"}, *first, {"record": "run"}, *second]))
    journal = Journal.open(path, plan="p.toml", total=2, resume=True, force=False)
    journal.close()
    assert journal.done == {"a": second, "b": first[2:]}


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
    assert path.read_bytes() == before  # --force replaces the file only when a corner is written
    forced = Journal.open(path, plan="p.toml", total=1, resume=False, force=True)
    forced.write(({"record": "corner", "key": "b"},))
    forced.close()
    assert b'"key": "a"' not in path.read_bytes() and b'"key":"b"' in path.read_bytes()


def test_a_second_run_on_a_held_results_file_refuses_and_leaves_it_alone(tmp_path):
    """While one run holds the results file, a second one (even with --resume or --force) refuses at once with a
    message naming the file and --out, and the first run's records stay whole."""
    path = tmp_path / "r.jsonl"
    first = Journal.open(path, plan="p.toml", total=2, resume=False, force=False)
    first.write(({"record": "corner", "key": "a", "outcome": "pass"},))
    for resume, force in ((True, False), (False, True)):
        with pytest.raises(NetloopError, match=r"r\.jsonl is in use by another netloop corners run; wait for it to end, "
                                               r"or give this run another file with --out$"):
            Journal.open(path, plan="p.toml", total=2, resume=resume, force=force)
    first.write(({"record": "corner", "key": "b", "outcome": "pass"},))
    first.close()
    records, good = read_records(path)
    assert [r.get("key") for r in records] == [None, "a", "b"] and good == path.stat().st_size


def test_nothing_is_written_until_a_corner_finishes(tmp_path):
    """A run that ends before its first corner (an unreachable scheduler) leaves no results file behind, so the same
    command can be given again."""
    path = tmp_path / "r.jsonl"
    Journal.open(path, plan="p.toml", total=3, resume=False, force=False).close()
    assert not path.exists()
    Journal.open(path, plan="p.toml", total=3, resume=False, force=False).close()  # not refused: nothing was left


def test_resume_measures_again_the_corners_whose_input_files_changed(tmp_path):
    """A record is kept by --resume only while the fingerprints of its input files match; a corner whose netlist or
    model file changed is not done (its changed files are named), and the records of a later run supersede earlier ones."""
    net, lib = tmp_path / "a.cir", tmp_path / "m.lib"
    net.write_text("t\n.end\n")
    lib.write_text("* models\n")
    path = tmp_path / "r.jsonl"
    now = {"k1": fingerprints([str(net), str(lib)]), "k2": fingerprints([str(net)])}
    j = Journal.open(path, plan="p.toml", total=2, resume=False, force=False, inputs=now)
    j.write(({"record": "corner", "key": "k1", "outcome": "pass", "inputs": now["k1"]},))
    j.write(({"record": "corner", "key": "k2", "outcome": "fail", "inputs": now["k2"]},))
    j.close()
    lib.write_text("* models, edited\n")
    later = {"k1": fingerprints([str(net), str(lib)]), "k2": fingerprints([str(net)])}
    j = Journal.open(path, plan="p.toml", total=2, resume=True, force=False, inputs=later)
    assert set(j.done) == {"k2"} and j.rerun == {"k1": (str(lib),)}
    j.write(({"record": "corner", "key": "k1", "outcome": "fail", "inputs": later["k1"]},))
    j.close()
    j = Journal.open(path, plan="p.toml", total=2, resume=True, force=False, inputs=later)
    assert {k: [r["outcome"] for r in v] for k, v in j.done.items()} == {"k1": ["fail"], "k2": ["fail"]} and not j.rerun
    j.close()
    path.write_text('{"record": "corner", "key": "k3", "outcome": "pass"}\n')  # written by a netloop without fingerprints
    j = Journal.open(path, plan="p.toml", total=1, resume=True, force=False, inputs={"k3": later["k2"]})
    assert j.rerun == {"k3": ("<input fingerprints not recorded>",)} and not j.done
    j.close()


@pytest.mark.parametrize(
    ("card", "expected"),
    [
        ("Vs a 0 3.3", "Vs a 0 2.5"),
        ("Vs a 0 dc 3.3 ac 1", "Vs a 0 dc 2.5 ac 1"),
        ("Vs a 0 ac 1", "Vs a 0 dc 2.5 ac 1"),
        ("Vs a 0 DC {vdd}", "Vs a 0 DC 2.5"),
        ("Vs a 0 dc", "Vs a 0 dc 2.5"),  # the DC word with no value after it: the value goes after it
        ("Vs a 0", "Vs a 0 dc 2.5"),  # no value (the manual: it may be omitted when zero): the DC word and the value after the nodes
        ("Vs a 0 pulse(0 1 1n 1n 1n 5n 10n)", "Vs a 0 dc 2.5 pulse(0 1 1n 1n 1n 5n 10n)"),
    ],
)
def test_supply_setting_writes_the_dc_value_where_ngspice_reads_it(tmp_path, card, expected):
    """A supply setting sets the DC value of each independent-source form (ngspice manual, 'Independent Sources': V N+ N- <DC> VALUE <AC ...> <transient>)."""
    src = tmp_path / "s.cir"
    src.write_text(f"t\n.param vdd=3\n{card}\nR1 a 0 1k\n.end\n")
    nl = apply_settings(str(src), (Setting("supply", "vs", "2.5"),))
    assert nl.element("vs").card() == expected


def test_a_new_results_file_starts_with_its_run_record_in_compact_strict_json(tmp_path):
    """A results file in folders that do not exist yet is created with them; its first line is the run record (plan,
    corner count, not resumed, the start as ISO 8601 UTC between the calls around it), then one line per record of a
    task, every line compact JSON."""
    from datetime import datetime, timezone

    from netloop.jobs.corners.journal import SCHEMA

    path = tmp_path / "a" / "b" / "r.jsonl"
    before = datetime.now(timezone.utc).replace(microsecond=0)
    journal = Journal.open(path, plan="p.toml", total=3, resume=False, force=False)
    journal.write(({"record": "corner", "key": "a", "at": "out", "seconds": 1.5}, {"record": "corner", "key": "a", "at": "fb"}))  # one task, two loops
    journal.close()
    after = datetime.now(timezone.utc)
    lines = path.read_text().splitlines()
    header = json.loads(lines[0])
    assert header == {"record": "run", "schema": SCHEMA, "plan": "p.toml", "corners": 3, "resumed": False, "started": header["started"]}
    assert before <= datetime.fromisoformat(header["started"]) <= after
    assert lines == [json.dumps(json.loads(x), separators=(",", ":")) for x in lines]  # no spaces: compact
    assert [json.loads(x) for x in lines[1:]] == [{"record": "corner", "key": "a", "at": "out", "seconds": 1.5}, {"record": "corner", "key": "a", "at": "fb"}]


def test_a_record_with_nan_is_refused_and_the_file_never_holds_it(tmp_path):
    """The results file is strict JSON (RFC 8259 has no NaN): a record holding NaN raises ValueError, and a file that
    got nothing written is not left behind."""
    path = tmp_path / "r.jsonl"
    journal = Journal.open(path, plan="p.toml", total=1, resume=False, force=False)
    with pytest.raises(ValueError):
        journal.write(({"record": "corner", "key": "a", "loop": {"pm": float("nan")}},))
    journal.close()
    assert not path.exists()


def test_a_results_file_beneath_a_regular_file_is_refused_with_the_reason(tmp_path):
    """A results path whose folder is a regular file cannot be written, even by root: OutputError naming the path and
    the system's reason (os.strerror of the error the folder's creation gives)."""
    import errno
    import os

    from netloop.errors import OutputError

    (tmp_path / "plain").write_text("a file, not a folder\n")
    path = tmp_path / "plain" / "r.jsonl"
    with pytest.raises(OutputError) as info:
        Journal.open(path, plan="p.toml", total=1, resume=False, force=False)
    assert str(info.value) == f"cannot write the results file {str(path)!r}: {os.strerror(errno.EEXIST)}"
