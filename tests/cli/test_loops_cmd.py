"""`netloop loops` (text and JSON) and `netloop check` without --at, called through main()."""

from __future__ import annotations

import json

import pytest

from netloop.cli.main import main

NESTED = """nested loops (invented)
G1 0 b a 0 1m
G2 0 c b 0 1m
G3 0 a c 0 1m
G4 0 b c 0 1m
Ra a 0 1k
Rb b 0 1k
Rc c 0 1k
.end
"""


def test_loops_text_lists_groups_loops_and_reasons(tmp_path, capsys):
    """The text listing names the group by its best node, lists both loops and gives a reason for each candidate."""
    # Reference: by construction, the loops of NESTED are a->b->c->a and b->c->b; b and c are on both,
    # and c is driven by G2 alone while b has two drivers (G1, G4).
    path = tmp_path / "nested.cir"
    path.write_text(NESTED)
    assert main(["loops", str(path)]) == 0
    out = capsys.readouterr().out
    assert "1 loop group among 3 signal nodes" in out
    assert "b -g2(cp>n)-> c -g4(cp>n)-> b" in out
    assert "b -g2(cp>n)-> c -g3(cp>n)-> a -g1(cp>n)-> b" in out
    # The probe's split of c: G2's output on the driver side, G3's and G4's inputs on the load side (netloop.probe.break_loop).
    assert "loop 1 (c)" in out and "1. c: the probe splits c into driver side g2.n and load side" in out
    assert "which opens all 2 loops of the group" in out and "driven by one element (g2)" in out
    assert "3. a: the probe splits a into driver side g3.n" in out and "it opens loop 1.2; it leaves loop 1.1 (does not pass a) closed" in out


def test_loops_json_document(tmp_path, capsys):
    """--json prints one document with each group's loops (steps, nodes) and every candidate with rank and reason."""
    # Reference: by construction (NESTED, as above).
    path = tmp_path / "nested.cir"
    path.write_text(NESTED)
    assert main(["loops", str(path), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["schema"] == "netloop.loop-groups/1"
    (group,) = doc["groups"]
    assert [set(lp["nodes"]) for lp in group["loops"]] == [{"b", "c"}, {"a", "b", "c"}]
    assert [c["node"] for c in group["candidates"]] == ["c", "b", "a"]
    assert [c["rank"] for c in group["candidates"]] == [1, 2, 3]
    assert group["candidates"][2]["left_closed"] == [1] and group["candidates"][2]["reason"]
    assert group["candidates"][2]["kept_closed"] == [] and group["candidates"][2]["split_checked"] is True
    assert group["candidates"][0]["driver_side"] == ["g2.n"] and "g3.cp" in group["candidates"][0]["load_side"]


def test_loops_json_states_the_miller_loop_kept_closed_at_out(circuits, capsys):
    """On the Miller buffer the JSON lists, for out, the Cc/Rz/M6 loop as kept closed and every other loop as opened."""
    # Reference: circuits/miller_buffer.cir: break_loop(out) keeps cc.n with the drivers m6.d, m7.d (Cc's far end
    # leads through Rz to M6's gate), so the loop out -cc-> cz -rz-> o1 -m6-> out never crosses the probe.
    assert main(["loops", str(circuits / "miller_buffer.cir"), "--json"]) == 0
    (group,) = json.loads(capsys.readouterr().out)["groups"]
    out = group["candidates"][0]
    miller = next(lp["number"] for lp in group["loops"] if set(lp["elements"]) == {"m6", "cc", "rz"})
    assert out["node"] == "out" and out["driver_side"] == ["m6.d", "m7.d", "cc.n"]
    assert out["kept_closed"] == out["left_closed"] == [miller] and not out["opens_all"]
    assert sorted(out["opened"] + [miller]) == [lp["number"] for lp in group["loops"]]


def test_loops_split_checks_zero_keeps_the_structural_view(tmp_path, capsys):
    """--split-checks 0 lists candidates from the loop structure alone and says so."""
    # Reference: by construction (NESTED): with no split worked out, no candidate names a driver side.
    path = tmp_path / "nested.cir"
    path.write_text(NESTED)
    assert main(["loops", str(path), "--split-checks", "0"]) == 0
    out = capsys.readouterr().out
    assert "driver side" not in out and out.count("loop structure only") == 3
    assert main(["loops", str(path), "--split-checks", "-1"]) == 2
    assert "--split-checks must be at least 0" in capsys.readouterr().err


def test_loops_bad_bound_and_missing_file_exit_2(tmp_path, capsys):
    """A cap below 1 or a missing netlist is one clear message and exit status 2."""
    # Reference: netloop/errors.py contract (NetloopError -> one line, exit 2).
    path = tmp_path / "nested.cir"
    path.write_text(NESTED)
    assert main(["loops", str(path), "--max-loops", "0"]) == 2
    assert "--max-loops must be at least 1" in capsys.readouterr().err
    assert main(["loops", str(tmp_path / "absent.cir")]) == 2
    assert capsys.readouterr().err.count("\n") == 1


@pytest.mark.ngspice
def test_check_without_at_measures_each_group(circuits, capsys):
    """`netloop check` without --at on two buffers prints one JSON document per loop under "loops", and notes on stderr."""
    # Reference: circuits/testbench/shared_bias.cir header (loops at outa and outb, both stable).
    assert main(["check", str(circuits / "testbench" / "shared_bias.cir"), "--json"]) == 0
    captured = capsys.readouterr()
    doc = json.loads(captured.out)
    assert len(doc["loops"]) == 2 and doc["passed"] is True
    assert "loop 1: broken at outa" in captured.err and "loop 2: broken at outb" in captured.err
