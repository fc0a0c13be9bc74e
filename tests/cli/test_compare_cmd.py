"""`netloop compare`: the JSON document, the table, the overlaid plots and the exit statuses, through main()."""

from __future__ import annotations

import json

import pytest
from two_pole_loop import LOOP  # tests/two_pole_loop.py (tests/ is on the path with its conftest)

from netloop.cli.main import main

SWEEP = ["--fmin", "1", "--fmax", "1g"]


@pytest.fixture
def loop(tmp_path):
    path = tmp_path / "loop.cir"
    path.write_text(LOOP)
    return str(path)


@pytest.mark.ngspice
def test_json_has_locations_in_check_shape_differences_and_poles_agree(loop, capsys):
    """--json gives one entry per location with exactly the keys of check --json, the explained differences and poles_agree."""
    assert main(["compare", loop, "--at", "out", "--at", "b1", "--json", *SWEEP]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert main(["check", loop, "--at", "out", "--json", *SWEEP]) == 0
    single = json.loads(capsys.readouterr().out)
    assert [x["break"]["node"] for x in doc["locations"]] == ["out", "b1"]
    assert all(set(x) == set(single) for x in doc["locations"])
    (d,) = doc["differences"]
    assert d["kind"] == "same" and d["locations"] == ["out", "b1"]
    # the keys netloop/cli/compare_cmd.py's docstring gives for the schema netloop.locations/1
    assert set(d) == {"locations", "method", "kind", "max_relative_difference", "explanation", "loops"}
    assert d["explanation"].startswith("both open the same loops")
    (c,) = doc["pole_checks"]
    assert set(c) == {"locations", "method", "pole_a_rad_s", "pole_b_rad_s", "agree", "explanation"}
    assert doc["poles_agree"] is True and doc["passed"] is True
    # the same loop measured alone by check: its phase margin equals compare's to 1e-6 deg (reference: check, i.e. measure())
    assert doc["locations"][0]["margins"]["phase_margin_deg"] == pytest.approx(single["margins"]["phase_margin_deg"], abs=1e-6)


@pytest.mark.ngspice
def test_both_methods_table_and_overlaid_plots(loop, capsys, tmp_path):
    """--method both gives a column per location and method, and --plot writes the overlaid Bode and Nyquist files."""
    plot = tmp_path / "cmp.png"
    assert main(["compare", loop, "--at", "out", "--at", "n0", "--method", "both", "--plot", str(plot), "--csv", str(tmp_path / "t.csv"),
                 *SWEEP]) == 0
    out = capsys.readouterr().out
    lines = out.splitlines()
    assert lines[0] == "PASS  out (tian): pass, out (middlebrook): pass, n0 (tian): pass, n0 (middlebrook): pass"
    head = lines[2].split("  ")
    assert [h.strip() for h in head if h.strip()] == ["out (tian)", "out (middlebrook)", "n0 (tian)", "n0 (middlebrook)"]
    for row in ("DC loop gain", "gain crossovers", "phase margin", "gain margin", "modulus margin", "dominant pole", "verdict"):
        assert any(line.startswith(row) for line in out.splitlines())
    # each figure stands under its column's head (the columns are padded to their widest cell, nothing between them)
    starts = [lines[2].index(h) for h in ("out (tian)", "out (middlebrook)", "n0 (tian)", "n0 (middlebrook)")]
    verdict = next(line for line in lines if line.startswith("verdict"))
    assert all(verdict[at:].startswith("PASS stable") and verdict[at - 1] == " " for at in starts)
    assert "Tian's and Middlebrook's T agree at out" in out
    pole_row = next(line for line in lines if line.startswith("dominant pole"))
    assert "damping" in pole_row and "z=" not in out  # issue 15.14: the word, as check writes it
    assert plot.stat().st_size > 0 and (tmp_path / "cmp-nyquist.png").stat().st_size > 0
    # one CSV per location and method, named for both (the two methods at one node would otherwise share a name)
    assert sorted(p.name for p in tmp_path.glob("t-*.csv")) == ["t-n0-middlebrook.csv", "t-n0-tian.csv", "t-out-middlebrook.csv", "t-out-tian.csv"]


@pytest.mark.ngspice
def test_failed_requirement_exits_1(loop, capsys):
    """A requirement the loop misses (its phase margin is about 52 deg, closed form) makes the exit status 1."""
    assert main(["compare", loop, "--at", "out", "--at", "p1", "--require", "pm>=80", *SWEEP]) == 1
    assert "FAIL" in capsys.readouterr().out


def test_bad_input_exits_2(loop, capsys):
    """An unknown node, a single location, an unknown driver and a global --driver are bad input: exit status 2."""
    assert main(["compare", loop, "--at", "out", "--at", "nowhere"]) == 2
    assert "nowhere" in capsys.readouterr().err
    assert main(["compare", loop, "--at", "out"]) == 2
    assert "at least two" in capsys.readouterr().err
    assert main(["compare", loop, "--at", "out", "--at", "n0=nothing"]) == 2
    assert "nothing" in capsys.readouterr().err
    for spec in ("n0=", "=e0"):  # '=' with nothing on one side: the syntax named, before the netlist is read
        assert main(["compare", loop, "--at", "out", "--at", spec]) == 2
        assert capsys.readouterr().err == f"netloop: error: --at {spec!r}: expected NODE or NODE=ELEMENT[.PIN][,...]\n"
    with pytest.raises(SystemExit) as usage:  # drivers are given per location (--at NODE=ELEMENT), not with --driver
        main(["compare", loop, "--at", "out", "--at", "n0", "--driver", "e0"])
    assert usage.value.code == 2


@pytest.mark.ngspice
def test_compare_writes_each_locations_samples_and_one_report(loop, capsys, tmp_path):
    """compare --csv writes each location's sampled T (FILE-LOCATION.csv, the rows check --csv gives for that break)
    and --report one HTML page with a section per location."""
    csv_path, page = tmp_path / "t.csv", tmp_path / "cmp.html"
    assert main(["compare", loop, "--at", "out", "--at", "n0", "--csv", str(csv_path), "--report", str(page), *SWEEP]) == 0
    capsys.readouterr()
    assert sorted(p.name for p in tmp_path.glob("t-*.csv")) == ["t-n0.csv", "t-out.csv"]
    single = tmp_path / "single.csv"
    assert main(["check", loop, "--at", "out", "--csv", str(single), *SWEEP]) == 0
    head = single.read_text().splitlines()[0]
    assert (tmp_path / "t-out.csv").read_text().splitlines()[0] == head  # reference: check --csv, the same columns
    text = page.read_text(encoding="utf-8")
    assert text.count('<section id="loop-') == 2


@pytest.mark.ngspice
def test_at_node_equals_element_names_that_locations_driver(loop, capsys):
    """--at n0=e0, in the form the usage line gives (NODE[=ELEMENT[.PIN],...]), breaks n0 with e0's output as its driver
    side, as given; the other location's driver is decided from the circuit."""
    with pytest.raises(SystemExit):
        main(["compare", "--help"])
    assert "--at NODE[=ELEMENT[.PIN],...]" in capsys.readouterr().out
    assert main(["compare", loop, "--at", "out", "--at", "n0=e0", "--json", *SWEEP]) == 0
    out_break, n0_break = (x["break"] for x in json.loads(capsys.readouterr().out)["locations"])
    assert n0_break["node"] == "n0" and n0_break["driver_terminals"] == ["e0.p"]  # e0 n0 0 ...: its output pin on n0
    assert n0_break["decided_by"].startswith("driver side given by --at NODE=e0")
    assert out_break["node"] == "out" and not out_break["decided_by"].startswith("driver side given")


@pytest.mark.ngspice
def test_text_lists_each_locations_warnings_under_its_name(tmp_path, capsys):
    """The text form: the verdicts line, a blank line, the table; and at the end each location's warnings, named by
    location: here the one of an ignored .control block that alters a source (each measurement warns of it)."""
    path = tmp_path / "altered.cir"
    path.write_text(LOOP.replace(".end\n", ".control\nalter vref dc=0.6\nrun\n.endc\n.end\n"))
    assert main(["compare", str(path), "--at", "out", "--at", "b1", *SWEEP]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0] == "PASS  out: pass, b1: pass" and lines[1] == "" and lines[2].split() == ["out", "b1"]
    said = lines[lines.index("warnings") + 1:]
    assert [w.split(":")[0] for w in said] == ["  out", "  b1"]
    assert all("'alter vref dc=0.6' in the .control block changes source vref" in w for w in said)
