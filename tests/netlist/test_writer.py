"""Writing netlists back: self-contained decks that ngspice simulates to the same operating point."""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import pytest

from netloop.netlist import Element, parse_file, parse_text, write_netlist

# shared with tests/graph/test_flatten.py
AMP = (Path(__file__).parent / "data" / "hier_amp.cir").read_text()


MIXED = """mixed elements for the writer (invented values)
* every comment and continuation form ngspice reads
.param vs = 2 rload='1k*2'
.func half(x) {x/2}
.option temp=27
Vs in 0 dc {vs} ; a semicolon comment
Rin in a 1k $ a dollar comment
R2 a 0
* a comment between a card and its continuation
+ {rload}
E1 e 0 a 0 2
G1 0 g a 0 1m
Rg g 0 1k
Vsense e esense 0
Resense esense 0 2k
F1 0 f Vsense 3
Rf f 0 500
H1 h 0 Vsense 100
Rh h 0 1k
E2 p 0 POLY(2) a 0 e 0 0.1 1 0.5
Rp p 0 1k
B1 b 0 V = {half(V(a))} + 0.1
Rb b 0 1k
E3 v 0 VALUE = { V(a) * 3 }
Rv v 0 1k
D1 a d1 dmod
Rd d1 0 10k
Q1 qc qb 0 npn1
Rqb a qb 100k
Rqc in qc 1k
.subckt divider top mid params: ratio=2
R1 top mid {ratio * 1k}
R2 mid 0 1k
.ends divider
X1 in xm divider ratio = 3
.if (vs > 1)
Rif in ifn 1k
.else
Rif in ifn 2k
.endif
Rifl ifn 0 1k
.model dmod d is=1e-14
.model npn1 npn bf=100
.op
.end
"""


def _same_op(a: dict[str, float], b: dict[str, float]) -> None:
    assert a.keys() == b.keys()
    for k in a:
        assert math.isclose(a[k], b[k], rel_tol=1e-6, abs_tol=1e-15), k


def _op_before_and_after(text: str, folder: Path, op_of) -> tuple[dict[str, float], dict[str, float], str]:
    """ngspice's op of the user's file and of netloop's rewrite of it, and the rewrite."""
    src = folder / "user.cir"
    src.write_text(text)
    (folder / "orig").mkdir()
    (folder / "out").mkdir()
    rewritten = write_netlist(parse_file(src))
    return op_of(text, folder / "orig"), op_of(rewritten, folder / "out"), rewritten


@pytest.mark.ngspice
def test_rewritten_hierarchical_amplifier_has_same_operating_point(tmp_path, op_of):
    """The re-emitted hierarchical amplifier gives ngspice's own `op` exactly the values of the original."""
    original, rewritten, _ = _op_before_and_after(AMP, tmp_path, op_of)  # reference: ngspice op on the user's file
    _same_op(original, rewritten)
    assert original["out"] != 0.0


@pytest.mark.ngspice
def test_rewritten_mixed_elements_have_same_operating_point(tmp_path, op_of):
    """Controlled sources (linear, POLY, VALUE, F/H), B, D, Q, .func, .if and every comment form keep ngspice's op when rewritten."""
    original, rewritten, out = _op_before_and_after(MIXED, tmp_path, op_of)  # reference: ngspice op on the user's file
    assert "* a comment" not in out and ";" not in out and "$ a" not in out
    _same_op(original, rewritten)
    assert math.isclose(original["ifn"], 1.0, rel_tol=1e-6)  # the .if branch taken: 2 V over 1k + 1k


@pytest.mark.ngspice
def test_includes_and_sections_inlined_or_referenced_give_same_operating_point(tmp_path, op_of):
    """A deck with .lib sections and relative includes in a subfolder keeps ngspice's op when written, and when an included element is replaced."""
    sub = tmp_path / "lib"
    sub.mkdir()
    (sub / "corners.lib").write_text(
        "* invented corner library\n.lib typ\n.param rv=2k\n.include parts.inc\n.endl typ\n.lib slow\n.param rv=5k\n.include parts.inc\n.endl slow\n"
    )
    (sub / "parts.inc").write_text("* parts\n.subckt divider top mid\nR1 top mid {rv}\nR2 mid 0 1k\n.ends divider\nRx top2 0 3k\n")
    deck = "divider test\n.lib lib/corners.lib slow\nV1 top 0 5\nV2 top2 0 1\nX1 top mid divider\n.end\n"
    top = tmp_path / "top.cir"
    top.write_text(deck)
    nl = parse_file(top)
    out = write_netlist(nl)
    assert f".lib {sub / 'corners.lib'} slow" in out  # nothing replaced: the library is referenced
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    original = op_of(deck, tmp_path)  # reference: ngspice op on the original deck
    _same_op(original, op_of(out, tmp_path / "a"))
    # replace an element that came from the included file: the writer must inline the section with the change
    rx = next(s for s in nl.statements if isinstance(s, Element) and s.key == "rx")
    changed = replace(nl, statements=tuple(replace(rx, tokens=("top2", "0", "6k")) if s is rx else s for s in nl.statements))
    out2 = write_netlist(changed)
    assert ".lib " not in out2 and "Rx top2 0 6k" in out2 and ".param rv=5k" in out2
    got = op_of(out2, tmp_path / "b")
    assert math.isclose(got["v2#branch"], -1 / 6e3, rel_tol=1e-5)  # Ohm's law: 1 V across 6 kOhm
    assert math.isclose(got["mid"], original["mid"], rel_tol=1e-6)


def test_writer_drops_analyses_and_control_blocks():
    """Analyses and .control blocks never reach the written deck, whatever file they came from."""
    nl = parse_text("t\nR1 a 0 1\n.op\n.control\nshell touch /tmp/x\n.endc\n.end\n")
    out = write_netlist(nl)
    assert ".op" not in out and "shell" not in out and ".control" not in out
    assert out.splitlines()[0] == "t" and out.rstrip().endswith(".end")


def test_include_with_control_block_is_inlined(tmp_path):
    """An included file that held a .control block is inlined without it, never referenced again."""
    (tmp_path / "x.inc").write_text("R2 a 0 2\n.control\nshell echo hi\n.endc\n")
    nl = parse_text("t\n.include x.inc\nR1 a 0 1\n", base_dir=str(tmp_path))
    out = write_netlist(nl)
    assert ".include" not in out and "R2 a 0 2" in out and "shell" not in out
