"""A card ngspice prints back is found where it was written: an element by its name (at any depth), a dot statement by its words."""

from __future__ import annotations

from netloop.netlist import parse_text
from netloop.netlist.locate import card_location

TEXT = """located (invented)
.param rv=1k
V1 a 0 dc 1
R1 a b {rv}
X1 b blk
X2 b two
.subckt blk p
R2 p q 1k
Xin q inner
.ends
.subckt inner p
M7 p p 0 0 nch
R9 p 0 1k
.ends
.subckt two p
R9 p 0 2k
.ends
.model nch nmos level=1
.end
"""


def test_an_element_is_found_by_the_name_ngspice_prints():
    """ngspice lower-cases a card and names an element inside a block by its instance path (r.x1.r2, m.x1.xin.m7): both
    are found at the line that wrote them, top-level ones as they are."""
    netlist = parse_text(TEXT, source="t.cir")
    assert (card_location(netlist, "r1 a b 1k q=4").line, card_location(netlist, "r.x1.r2 b x1.q 1k q=4").line) == (4, 8)
    assert card_location(netlist, "m.x1.xin.m7 b b 0 0 nch x=3").line == 12
    assert card_location(netlist, "v1 a 0 dc {vdd}").file == "t.cir"


def test_a_dot_statement_is_found_by_its_words():
    """A .param line ngspice could not read is found by its words, whatever their case and spacing."""
    assert card_location(parse_text(TEXT, source="t.cir"), ".PARAM  rv=1k").line == 2


def test_a_name_two_blocks_use_or_no_element_uses_is_left_unplaced():
    """R9 is written in two blocks, r99 nowhere, a probe's own element is not the user's: no line is given at a guess."""
    netlist = parse_text(TEXT, source="t.cir")
    assert card_location(netlist, "r.x2.r9 b 0 2k q=1") is None
    assert card_location(netlist, "r99 a 0 1k") is None
    assert card_location(netlist, "") is None
