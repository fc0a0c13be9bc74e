"""`netloop loops` (the census: text and JSON) and `netloop check` without --at, called through main()."""

from __future__ import annotations

import json
import math

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


# Three stages in a ring, each gm R = 2 with 1k || 1n to ground (as tests/jobs/test_census.py); in RING_SENSED the
# second stage's output reaches its load through a 0 V source (a current sense), so c and cs are one loop node.
RING = """three-stage ring (invented)
G1 0 b a 0 2m
Rb b 0 1k
Cb b 0 1n
G2 0 c b 0 2m
Rc c 0 1k
Cc c 0 1n
G3 a 0 c 0 2m
Ra a 0 1k
Ca a 0 1n
.end
"""
RING_SENSED = RING.replace("three-stage ring", "three-stage ring with a 0 V current sense").replace(
    "Rc c 0 1k\nCc c 0 1n\nG3 a 0 c 0 2m", "Vsense c cs 0\nRc cs 0 1k\nCc cs 0 1n\nG3 a 0 cs 0 2m")


def _nested(tmp_path):
    path = tmp_path / "nested.cir"
    path.write_text(NESTED)
    return path


def test_loops_text_is_one_line_per_group_with_its_break_and_why(tmp_path, capsys):
    """Without a sweep the text gives the group, its counts and its break with the reason on one line; loops are counted, not listed."""
    # Reference: by construction, the loops of NESTED are a->b->c->a and b->c->b; b and c are on both,
    # and c is driven by G2 alone while b has two drivers (G1, G4); the probe puts g2.n alone on c's driver side.
    assert main(["loops", str(_nested(tmp_path)), "--no-sweep"]) == 0
    out = capsys.readouterr().out
    assert "1 loop group among 3 signal nodes" in out and "2 loops in all" in out
    (line,) = [x for x in out.splitlines() if x.startswith("  loop 1")]
    assert line.startswith("  loop 1 (c): 2 loops, 3 nodes; break at c: opens every loop of the group, driven by g2 alone")
    assert "-g2(cp>n)->" not in out  # the loops themselves only in --json
    assert out.rstrip().splitlines()[-1] == ("--json lists every loop, node, candidate and coarse figure; `netloop check NETLIST` "
                                            "measures each group at its break")
    assert main(["loops", str(_nested(tmp_path)), "--no-sweep", "--max-loops", "1"]) == 0
    capped = capsys.readouterr().out
    assert any(x.startswith("  loop 1 (") and ": 1 loop (capped), " in x for x in capped.splitlines())  # the search stopped at the cap
    assert main(["loops", str(_nested(tmp_path)), "--no-sweep", "--candidates", "3"]) == 0
    out = capsys.readouterr().out
    assert "1. c: the probe splits c into driver side g2.n and load side" in out
    assert "3. a: the probe splits a into driver side g3.n" in out and "it opens loop 1.2; it leaves loop 1.1 (does not pass a) closed" in out


def test_loops_json_document(tmp_path, capsys):
    """--json prints one document with each group's loops (steps, nodes), every candidate with rank and reason, and the chosen break."""
    # Reference: by construction (NESTED, as above).
    assert main(["loops", str(_nested(tmp_path)), "--json", "--no-sweep"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["schema"] == "netloop.loop-groups/1" and doc["swept"] is False
    (group,) = doc["groups"]
    assert [set(lp["nodes"]) for lp in group["loops"]] == [{"b", "c"}, {"a", "b", "c"}]
    steps = group["loops"][0]["steps"]
    assert all(set(st) >= {"from", "to", "elements", "pins", "passive"} for st in steps) and not any(st["passive"] for st in steps)
    assert [c["node"] for c in group["candidates"]] == ["c", "b", "a"]
    assert [c["rank"] for c in group["candidates"]] == [1, 2, 3]
    assert group["candidates"][2]["left_closed"] == [1] and group["candidates"][2]["reason"]
    assert group["candidates"][2]["kept_closed"] == [] and group["candidates"][2]["split_checked"] is True
    assert group["candidates"][0]["driver_side"] == ["g2.n"] and "g3.cp" in group["candidates"][0]["load_side"]
    assert group["chosen"] == "c" and group["coarse"] == [] and group["can_ring"] is None


def test_loops_json_states_the_miller_loop_kept_closed_at_out(circuits, capsys):
    """On the Miller buffer the JSON lists, for out, the Cc/Rz/M6 loop as kept closed and every other loop as opened."""
    # Reference: circuits/miller_buffer.cir: break_loop(out) keeps cc.n with the drivers m6.d, m7.d (Cc's far end
    # leads through Rz to M6's gate), so the loop out -cc-> cz -rz-> o1 -m6-> out never crosses the probe.
    assert main(["loops", str(circuits / "miller_buffer.cir"), "--json", "--no-sweep"]) == 0
    (group,) = json.loads(capsys.readouterr().out)["groups"]
    out = group["candidates"][0]
    miller = next(lp["number"] for lp in group["loops"] if set(lp["elements"]) == {"m6", "cc", "rz"})
    assert out["node"] == "out" and out["driver_side"] == ["m6.d", "m7.d", "cc.n"]
    assert out["kept_closed"] == out["left_closed"] == [miller] and not out["opens_all"]
    assert sorted(out["opened"] + [miller]) == [lp["number"] for lp in group["loops"]]
    assert group["looked_through"] == ["tail", "d1"] or set(group["looked_through"]) == {"tail", "d1"}


def test_loops_split_checks_zero_keeps_the_structural_view(tmp_path, capsys):
    """--split-checks 0 chooses from the loop structure alone (no sweep) and says so."""
    # Reference: by construction (NESTED): with no split worked out, no candidate names a driver side.
    path = _nested(tmp_path)
    assert main(["loops", str(path), "--split-checks", "0", "--candidates", "3"]) == 0
    out = capsys.readouterr().out
    assert "driver side" not in out and "loop structure only" in out and "no coarse sweep" in out
    # c is on both loops (NESTED's a->b->c->a and b->c->b), so the structure alone says it is on every loop of the group
    assert ("  loop 1 (c): 2 loops, 3 nodes; break at c: on every loop of the group (loop structure only: the probe's split "
            "there was not worked out), driven by g2 alone") in out.splitlines()
    assert main(["loops", str(path), "--split-checks", "-1"]) == 2
    assert "--split-checks must be at least 0" in capsys.readouterr().err


def test_loops_bad_bound_and_missing_file_exit_2(tmp_path, capsys):
    """A cap below 1 or a missing netlist is one clear message and exit status 2."""
    # Reference: netloop/errors.py contract (NetloopError -> one line, exit 2).
    path = _nested(tmp_path)
    assert main(["loops", str(path), "--max-loops", "0"]) == 2
    assert "--max-loops must be at least 1" in capsys.readouterr().err
    assert main(["loops", str(tmp_path / "absent.cir")]) == 2
    assert capsys.readouterr().err.count("\n") == 1


@pytest.mark.ngspice
def test_the_regulator_census_reads_in_one_screen(circuits, capsys):
    """`netloop loops` on the bandgap regulator bench fits one screen: a line per group, the groups that can ring first."""
    # Reference: circuits/benches/bandgap_reg.cir header: two loops (the regulation loop, the bandgap's), both with
    # loop gain above 0 dB at DC or near it; a screen is 24 lines of 120 columns at most (common practice, from memory).
    assert main(["loops", str(circuits / "benches" / "bandgap_reg.cir")]) == 0
    out = capsys.readouterr().out
    lines = out.splitlines()
    assert len(lines) <= 24 and sum(len(x) // 120 + 1 for x in lines) <= 24
    assert lines[2].startswith("can ring") and sum(x.startswith("  loop ") for x in lines) == 2
    assert "break at fb:" in out and "0 dB near" in out


@pytest.mark.ngspice
def test_check_without_at_measures_each_group(circuits, capsys):
    """`netloop check` without --at on two buffers prints one JSON entry per group under "loops", and notes on stderr."""
    # Reference: circuits/testbench/shared_bias.cir header (loops at outa and outb, both stable).
    assert main(["check", str(circuits / "testbench" / "shared_bias.cir"), "--json"]) == 0
    captured = capsys.readouterr()
    doc = json.loads(captured.out)
    assert len(doc["loops"]) == 2 and doc["passed"] is True and all(e["measured"] for e in doc["loops"])
    assert [e["group"]["chosen"] for e in doc["loops"]] == ["outa", "outb"]
    assert "loop 1 (outa): broken at outa" in captured.err and "loop 2 (outb): broken at outb" in captured.err


@pytest.mark.ngspice
def test_an_open_loop_copy_is_measured_on_its_own_and_is_not_an_error(circuits, capsys):
    """A testbench with an open-loop copy of its amplifier: the buffer gets its result at out, the copy's own Miller loop is
    a group of its own, broken inside the copy at its output pin (the only level where the loop passes), and nothing is an error."""
    # Reference: circuits/benches/tb_open_copy.cir header: the buffer's loop closes at out; the copy has only its Miller
    # branch xol.o1 -> M6 -> olout -> Cc/Rz -> xol.o1, and its output olout carries only the copy's pin and Cl2 at the top.
    status = main(["check", str(circuits / "benches" / "tb_open_copy.cir"), "--json"])
    doc = json.loads(capsys.readouterr().out)
    first, second = doc["loops"]
    assert first["measured"] and first["verdict"] == "pass" and first["break"]["node"] == "out"
    assert second["measured"] and second["break"]["node"] == "xol.out" and second["verdict"] in ("pass", "inconclusive")
    assert status == {"pass": 0, "inconclusive": 3}[doc["verdict"]]
    main(["check", str(circuits / "benches" / "tb_open_copy.cir")])
    text = capsys.readouterr().out
    assert text.startswith(f"{doc['verdict'].upper()}  loop 1 (out): pass, loop 2 (xol.out): {second['verdict']}\n")


def test_loops_text_counts_the_nodes_joined_by_a_0v_source(tmp_path, capsys):
    """The text's count line says how many nodes 0 V sources joined into how many loop nodes (docs/census.md, section 1)."""
    # Reference: by construction: Vsense (0 V) joins c and cs, the ring's only loop passes both: 2 nodes, 1 loop node.
    path = tmp_path / "sensed.cir"
    path.write_text(RING_SENSED)
    assert main(["loops", str(path), "--no-sweep"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[1] == "counted as a designer reads the circuit: 1 loop in all; 2 nodes joined by 0 V sources into 1 loop node"
    assert main(["loops", str(path), "--no-sweep", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["groups"][0]["merged"] == [["c", "cs"]]


@pytest.mark.ngspice
def test_loops_json_gives_each_swept_break_its_coarse_figures(tmp_path, capsys):
    """--json lists, for every break the coarse sweep measured, the figures README names (dc_db, peak_db, unity_hz,
    top_db, ...) as the closed form of the ring gives them, and an empty "error"."""
    # Reference: closed form: T = 8 / (1 + s tau)^3 at every node, tau = 1k * 1n, fp = 1 / (2 pi tau) = 159 kHz:
    # |T| is largest at the bottom of the coarse sweep (10 mHz, docs/census.md section 3), 20 log10 8 = 18.06 dB there,
    # 1 at fp sqrt(3) = 276 kHz (within the coarse interpolation, as tests/jobs/test_census.py), and at 1 THz
    # 20 log10 8 - 30 log10(1 + (1e12 / fp)^2) = -389.8 dB.
    path = tmp_path / "ring.cir"
    path.write_text(RING)
    assert main(["loops", str(path), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    (group,) = doc["groups"]
    fp = 1 / (2 * math.pi * 1e3 * 1e-9)
    dc_db = 20 * math.log10(8)
    assert doc["swept"] is True and sorted(c["node"] for c in group["coarse"]) == ["a", "b", "c"]
    for c in group["coarse"]:
        assert c["dc_db"] == pytest.approx(dc_db, abs=1e-3) and c["peak_db"] == pytest.approx(dc_db, abs=1e-3)
        assert c["peak_hz"] == pytest.approx(0.01)
        assert c["unity_hz"] == pytest.approx(fp * math.sqrt(3), rel=0.15)
        assert c["top_db"] == pytest.approx(dc_db - 30 * math.log10(1 + (1e12 / fp) ** 2), abs=0.01)
        assert c["negligible"] is False and c["falls"] is True and c["error"] == ""
    assert group["can_ring"] is True and group["chosen"] in ("a", "b", "c")


def test_loops_json_says_why_a_break_was_not_swept():
    """A candidate the coarse sweep could not measure keeps its reason under "error" in the document, and no figure."""
    # Reference: by construction: the coarse figures are given (as tests/jobs/test_census.py gives them).
    from netloop.cli.loops_cmd import census_document
    from netloop.graph import find_loops, flatten
    from netloop.jobs.census import Census, CoarseBreak, choose
    from netloop.netlist import parse_text

    found = find_loops(flatten(parse_text(RING)))
    (group,) = found.groups
    a, b = (c.break_name for c in group.candidates[:2])
    coarse = (CoarseBreak(a, error="the simulator stopped"), CoarseBreak(b, 18.0, 18.0, 0.01, 2.7e5, -390.0))
    doc = census_document(Census("ring.cir", found, (choose(group, coarse),), True))
    first, second = doc["groups"][0]["coarse"]
    assert first == {"node": a, "dc_db": None, "peak_db": None, "peak_hz": None, "unity_hz": None, "top_db": None,
                     "negligible": False, "falls": False, "error": "the simulator stopped"}
    assert second["peak_db"] == 18.0 and second["error"] == ""


def test_the_census_text_names_each_kind_of_group_under_its_own_heading():
    """A group whose coarse T stays below 0 dB at every break swept, and one no break measures (its reason cut to 320
    characters with '...': --json has it whole), each stand under the heading that says so, word for word."""
    from dataclasses import replace

    import numpy as np

    from netloop.cli.loops_cmd import format_census
    from netloop.jobs.census import coarse_figures
    from netloop.jobs.discover import take_census
    from netloop.netlist import parse_text

    census = take_census(parse_text(RING), sweep=False)
    (gc,) = census.groups
    f = np.logspace(-2, 12, 43)
    quiet = replace(gc, coarse=(coarse_figures(gc.group.candidates[0].node, f, 0.5 / (1 + 1j * f / 1e3)),))
    why = "no node of this group can be broken so that T measures one of its loops: " + "; ".join(f"n{k} (refused)" for k in range(60))
    broken = replace(gc, chosen=None, why=why)
    lines = format_census(replace(census, groups=(quiet, broken), swept=True)).splitlines()
    assert quiet.can_ring is False
    at = lines.index("cannot ring on its own (|T| below 0 dB at every break swept):")
    assert lines[at + 1].startswith(f"  {gc.label}: ")
    assert lines[at + 2] == "no break measures these (check reports them as inconclusive):"
    cut = lines[at + 3].split("; no break: ", 1)[1]
    assert len(cut) == 320 and cut.endswith("...") and why.startswith(cut[:-3])
