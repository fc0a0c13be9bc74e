"""Every malformed statement the reader refuses: one message at file:line:column saying what was expected, the line, and a caret under the fault."""

from __future__ import annotations

import pytest

from netloop.errors import NetlistError, NetlistSyntaxError
from netloop.netlist import parse_file, parse_text

END = "end"  # the caret stands one column past the end of the statement: something is missing there

# (statement on line 3 of amp.cir, message, column of the fault: END, or the text the caret points at)
CARDS = [
    ("Y1 a b 1", "unknown element type 'Y': expected one of R C L K V I E F G H B D M Q J Z S W T O U X A", "Y1"),
    ("R1 a", "R1: expected 2 nodes and a value", END),
    ("V1 a", "V1: expected 2 nodes", END),
    ("M1 d g s nch", "M1: expected 4 nodes and a model (3, or 5 with the thermal nodes, for a vdmos model)", END),
    ("F1 o 0 POLY(2) vx", "F1: expected 2 controlling sources and the coefficients after POLY(2)", END),
    ("H1 o 0 poly(3) va vb", "H1: expected 3 controlling sources and the coefficients after poly(3)", END),
    ("F1 o 0 POLY(1) vx", "F1: expected 1 controlling sources and the coefficients after POLY(1)", END),  # ngspice 39 refuses it too
    ("E1 o 0", "E1: expected 2 output nodes and a gain, POLY(n), VALUE= or TABLE form", END),
    ("G1 o 0 POLY(2) a 0", "G1: expected 4 controlling nodes and the coefficients after POLY(2)", END),
    ("G1 o 0 POLY(2) a 0 b 0", "G1: expected 4 controlling nodes and the coefficients after POLY(2)", END),  # ngspice 39 refuses it too
    ("E1 o 0 a 0", "E1: expected 2 output nodes, 2 controlling nodes and a gain", END),
    ("Q1 c b e", "Q1: expected 3 or 4 nodes and a model", END),
    ("X1 w=1 l=2", "X1: expected nodes and a subcircuit name", END),
    ("A1 x", "A1: expected connections and a model", END),
    ("R1 a {b} 1", "R1: expected a node name, got '{b}'", "{b}"),
    ("V1 a {b}", "V1: expected a node name, got '{b}'", "{b}"),  # the fault is the card's last piece
    ("M1 d g s=1 b nch", "M1: expected a node name, got 's=1'", "s=1"),
    (".include", ".include: expected a file name", END),
    (".inc  ", ".inc: expected a file name", END),
    (".lib", ".lib: expected a file name and a section, or a section name", END),
    (".subckt", ".subckt: expected a name and pins", END),
    (".ends", ".ends without a .subckt before it", ".ends"),
    (".lib models.lib\nR1 a 0 1", ".lib models.lib: a library section with no .endl; to read a section of a file write .lib FILE SECTION", END),
]


@pytest.mark.parametrize("card,message,fault", CARDS, ids=[c[0].split("\n")[0] for c in CARDS])
def test_malformed_statement_message(card, message, fault):
    """The first line is amp.cir:3:COLUMN: what was expected; then the statement as read and a caret at that column."""
    text = f"title\nR0 x 0 1\n{card}\nR9 y 0 1\n"
    with pytest.raises(NetlistSyntaxError) as info:
        parse_text(text, source="amp.cir")
    statement = card.split("\n")[0].strip()  # the reader strips the line and reports the statement as read
    column = len(statement) + 2 if fault == END else statement.index(fault) + 1
    head, line, caret = str(info.value).splitlines()
    assert head == f"amp.cir:3:{column}: {message}"
    assert line == f"    {statement}"
    assert caret == "    " + " " * (column - 1) + "^"
    assert (info.value.location.file, info.value.location.line, info.value.location.column) == ("amp.cir", 3, column)


@pytest.mark.parametrize("text,line", [("t\n+ r=1\n", 2), ("t\n.control\nop\n.endc\n+ r=1\n", 5)])
def test_continuation_with_nothing_to_continue(text, line):
    """A '+' line right after the title, or after a .control block (which nothing continues), is refused at its own line."""
    with pytest.raises(NetlistSyntaxError) as info:
        parse_text(text, source="amp.cir")
    assert str(info.value).splitlines() == [f"amp.cir:{line}:1: a continuation line ('+') with no statement before it to continue", "    + r=1", "    ^"]


def test_unclosed_subcircuit_points_at_its_header():
    """A .subckt never closed is reported at its own line, with the header as written; of nested ones, the innermost."""
    with pytest.raises(NetlistSyntaxError) as info:
        parse_text("t\nR0 a 0 1\n.SUBCKT Amp in out\nR1 in out 1k\n", source="amp.cir")
    assert str(info.value).splitlines()[:2] == ["amp.cir:3:1: .subckt amp: expected .ends before the end of the netlist", "    .SUBCKT Amp in out"]
    with pytest.raises(NetlistSyntaxError) as info:  # nested: the innermost, which the next .ends would close (as ngspice closes)
        parse_text("t\n.subckt outer a\n.subckt inner b\nR1 b 0 1k\n", source="amp.cir")
    assert str(info.value).splitlines()[0] == "amp.cir:3:1: .subckt inner: expected .ends before the end of the netlist"


def _refused(path) -> str:
    """The message of the NetlistError that reading ``path`` raises."""
    with pytest.raises(NetlistError) as info:
        parse_file(path)
    return str(info.value)


def test_files_that_cannot_be_read(tmp_path):
    """A missing top file names itself; a missing include names the including line; a self-include and a missing section say so."""
    assert _refused(tmp_path / "nothere.cir") == f"cannot read netlist {str(tmp_path / 'nothere.cir')!r}: No such file or directory"
    top = tmp_path / "top.cir"
    top.write_text("t\nR1 a 0 1\n.include 'parts.inc'\n")
    assert _refused(top) == f"{top}:3:1: cannot read {str(tmp_path / 'parts.inc')!r}: No such file or directory"
    (tmp_path / "loop.inc").write_text("R2 b 0 1\n.include loop.inc\n")
    top.write_text("t\n.inc loop.inc\n")
    assert _refused(top) == f"{tmp_path / 'loop.inc'}:2:1: {str(tmp_path / 'loop.inc')!r} includes itself"
    (tmp_path / "l.lib").write_text(".lib tt\n.endl\n.lib ss\n.endl ss\n")
    top.write_text("t\n.lib l.lib ff\n")
    assert _refused(top) == f"{top}:2:1: library {str(tmp_path / 'l.lib')!r} has no section 'ff' (sections: ss, tt)"
    (tmp_path / "empty.lib").write_text("* no sections\n")
    top.write_text("t\n.lib empty.lib ff\n")
    assert _refused(top).endswith("has no section 'ff' (sections: none)")


def test_instance_with_the_wrong_number_of_nodes():
    """An X card giving 3 nodes to a 2-pin definition (defined after it) is refused at the card's own line, naming the pins."""
    text = "title\nR0 x 0 1\nX1 a b c amp\n.subckt amp in out\nR1 in out 1k\n.ends amp\n"
    with pytest.raises(NetlistSyntaxError) as info:
        parse_text(text, source="amp.cir")
    head, line, caret = str(info.value).splitlines()
    assert head == "amp.cir:3:1: X1: subcircuit amp has 2 pins (in out), the card gives 3 nodes"
    assert (line, caret) == ("    X1 a b c amp", "    ^")


def test_binary_files_are_refused_at_their_nul_byte(tmp_path):
    """A netlist or include holding a NUL byte (no SPICE text does) is refused naming the file and the line of the byte,
    and for an include the including line too; its lines are not echoed (house rule: file:line and what was expected)."""
    top = tmp_path / "top.cir"
    top.write_bytes(b"t\nR1 a 0 1\nR2 a\x00 0 1\n")
    assert _refused(top) == f"{top}:3: not a text netlist: it holds binary bytes (a NUL byte on line 3); give the SPICE netlist file"
    (tmp_path / "blob.inc").write_bytes(b"\x7fELF\x00\x01")
    top.write_text("t\nR1 a 0 1\n.include blob.inc\n")
    blob = tmp_path / "blob.inc"
    assert _refused(top) == (f"{top}:3:1: {blob}:1: not a text netlist: it holds binary bytes (a NUL byte on line 1); "
                             "give the SPICE netlist file")


def test_a_pin_outside_ascii_is_refused_at_its_column():
    """A .subckt pin with a non-ASCII character is refused at the pin, saying why and what to write instead (ngspice cannot
    name such a node in its output)."""
    text = "title\nR0 x 0 1\n.subckt amp in ôut\nR1 in ôut 1k\n.ends\n"
    with pytest.raises(NetlistSyntaxError) as info:
        parse_text(text, source="amp.cir")
    head, line, caret = str(info.value).splitlines()
    assert head == ("amp.cir:3:16: .subckt amp: pin 'ôut' has characters outside ASCII, which ngspice cannot name in its output; "
                    "rename it with ASCII letters, digits and _")
    assert (line, caret) == ("    .subckt amp in ôut", "    " + " " * 15 + "^")


@pytest.mark.parametrize(("card", "column"), [
    ("A1 [a b] ôut amod", 10),  # an XSPICE card's brackets: "[a b]" is four tokens, two pieces of text
    ("A2 [a {x}] out amod", 7),
    ("X1 a w = 2 ôut amp", 12),  # a spaced key = value between the nodes, read as one token
    ("R1  ôut\tôut 1k", 5),  # the first of two equal pieces
    ("E1 a ôut2 {x} 0 1", 6),
    ("V1 ôut 0 dc 1", 4),
])
def test_a_bad_node_is_refused_at_its_own_column(card, column):
    """The caret of a node refused (outside ASCII, or an expression where a node stands) points at that node, also where
    the tokens the card is split into are not its pieces of text: it pointed at the model name of an XSPICE card with a
    bracketed input, and at the wrong piece after a spaced key = value."""
    with pytest.raises(NetlistSyntaxError) as info:
        parse_text(f"title\nR0 x 0 1\n{card}\n", source="amp.cir")
    head, line, caret = str(info.value).splitlines()
    assert head.startswith(f"amp.cir:3:{column}: {card.split()[0]}: ")
    assert (line, caret) == ("    " + card, "    " + " " * (column - 1) + "^")


def test_a_four_token_mosfet_of_a_later_model_is_refused_at_its_line():
    """`M1 d g s nch` with `.model nch nmos` after it is found short of its bulk node only once the model is known; it is
    still refused at its own line with the caret past its end (ngspice manual, MOSFETs: Mxxx nd ng ns nb mname)."""
    with pytest.raises(NetlistSyntaxError) as info:
        parse_text("title\nR0 x 0 1\nM1 d g s nch\n.model nch nmos\n", source="amp.cir")
    head, line, caret = str(info.value).splitlines()
    assert head == "amp.cir:3:14: M1: expected 4 nodes and a model (3, or 5 with the thermal nodes, for a vdmos model)"
    assert (line, caret) == ("    M1 d g s nch", "    " + " " * 13 + "^")
