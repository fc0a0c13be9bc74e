"""Reading the ngspice dialect: comments, continuations, element cards, subcircuits, includes, library sections."""

from __future__ import annotations

import re

import pytest

from netloop.errors import NetlistError, NetlistSyntaxError, UnknownNodeError
from netloop.netlist import Directive, Element, Subcircuit, controlling_sources, parse_file, parse_text
from netloop.netlist.cards import resolve_bjt


def test_title_comments_and_continuations():
    """The first line is the title even if it looks like a card; every comment and continuation form is handled."""
    nl = parse_text(
        "R9 this is the title\n"
        "* a full-line comment\n"
        "   * an indented comment\n"
        "R1 a b 1k ; semicolon comment\n"
        "R2 b c 2k $ dollar comment\n"
        "C1 c 0\n"
        "* a comment between a card and its continuation\n"
        "\n"
        "+ 10p\n"
        "  + ic=0\n"
        "V1 a 0 dc 1\n"
    )
    assert nl.title == "R9 this is the title"
    assert [e.name for e in nl.elements] == ["R1", "R2", "C1", "V1"]
    assert nl.element("c1").tokens == ("c", "0", "10p", "ic=0")
    assert nl.element("c1").location.line == 6  # a continued card is located at its first line
    assert nl.element("r2").tokens == ("b", "c", "2k")


def test_names_are_case_insensitive_and_nodes_lower_cased():
    """Element lookup ignores case and node names come back lower-case, as ngspice treats them."""
    nl = parse_text("t\nRLOAD OUT Vdd 1K\nR2 + - 1\nR3 +V bus[3] 2\n")
    r = nl.element("rload")
    assert r.nodes == ("out", "vdd") and r.tokens[2] == "1K"
    assert nl.element("R2").nodes == ("+", "-")
    assert nl.element("r3").nodes == ("+v", "bus[3]")
    with pytest.raises(UnknownNodeError) as info:
        nl.element("rlaod")
    assert "rload" in info.value.suggestions


def test_element_letters_and_their_terminals():
    """Every element letter gets its node slots and pin roles."""
    nl = parse_text(
        "t\n"
        "R1 a b r=1k\n"
        "L1 a b 1u\n"
        "V1 a 0 SIN(0 1 1k)\n"
        "I1 a 0 PULSE(0 1m 0 1n 1n 1u 2u)\n"
        "E1 o 0 a b 10\n"
        "G1 o 0 a b 1m\n"
        "E2 o 0 POLY(2) a 0 b 0 0 1 1\n"
        "E3 o 0 VALUE = { V(a) * 2 }\n"
        "G2 o 0 TABLE {V(a)} = (0,0) (1,1)\n"
        "F1 o 0 Vsense 2\n"
        "H1 o 0 POLY(2) Va Vb 0 1 1\n"
        "B1 o 0 V = V(a) * V(b)\n"
        "D1 a k dmod area=2\n"
        "M1 d g s b nch w=1u l=1u\n"
        "J1 d g s jmod\n"
        "Z1 d g s zmod\n"
        "S1 a b c d smod\n"
        "W1 a b Vsense wmod\n"
        "T1 a 0 b 0 z0=50 td=1n\n"
        "O1 a 0 b 0 lmod\n"
        "U1 a b 0 umod l=1m n=10\n"
        "K1 L1 L2 0.9\n"
        "X1 a b sub params: g=2\n"
        "A1 [a b] y amod\n"
        ".subckt sub p q params: g=1\n"
        "R1 p q {g}\n"
        ".ends\n"
    )
    got = {e.name: (e.nodes, e.pins) for e in nl.elements}
    assert got["R1"] == (("a", "b"), ("p", "n"))
    assert got["E1"] == (("o", "0", "a", "b"), ("p", "n", "cp", "cn"))
    assert got["E2"] == (("o", "0", "a", "0", "b", "0"), ("p", "n", "cp1", "cn1", "cp2", "cn2"))
    assert got["E3"] == (("o", "0"), ("p", "n"))
    assert nl.element("e3").tokens[2] == "VALUE={ V(a) * 2 }"
    assert got["G2"] == (("o", "0"), ("p", "n"))
    assert got["F1"] == (("o", "0"), ("p", "n"))
    assert nl.element("F1").model is None
    assert controlling_sources(nl.element("F1")) == ("vsense",)
    assert controlling_sources(nl.element("H1")) == ("va", "vb")
    assert controlling_sources(nl.element("W1")) == ("vsense",)
    assert got["D1"] == (("a", "k"), ("p", "n")) and nl.element("d1").model == "dmod"
    assert got["M1"] == (("d", "g", "s", "b"), ("d", "g", "s", "b")) and nl.element("m1").model == "nch"
    assert got["J1"][1] == ("d", "g", "s") and got["Z1"][1] == ("d", "g", "s")
    assert got["S1"] == (("a", "b", "c", "d"), ("p", "n", "cp", "cn"))
    assert got["W1"] == (("a", "b"), ("p", "n"))
    assert len(got["T1"][0]) == 4 and len(got["O1"][0]) == 4 and len(got["U1"][0]) == 3
    assert got["K1"] == ((), ())
    assert got["X1"] == (("a", "b"), ("p", "q"))  # pins are the definition's pin names
    assert nl.element("x1").model == "sub"
    assert got["A1"][0] == ("a", "b", "y") and nl.element("a1").model == "amod"
    assert nl.element("V1").tokens == ("a", "0", "SIN(0", "1", "1k)")  # source specs kept verbatim


def test_bjt_substrate_node_resolved_by_model_names():
    """Q cards have a 4th (substrate) node only when token 4 is not a known model, even if the model comes later."""
    nl = parse_text("t\nQ1 c b e npn1\nQ2 c b e sub npn1\nQ3 c b e s qx\n.model npn1 npn\n.model qx pnp\n")
    assert nl.element("q1").pins == ("c", "b", "e") and nl.element("q1").model == "npn1"
    assert nl.element("q2").nodes == ("c", "b", "e", "sub") and nl.element("q2").model == "npn1"
    assert nl.element("q3").nodes == ("c", "b", "e", "s")


def test_x_card_parameters_and_params_keyword():
    """An X card's subcircuit name is the last plain token: key=value and params: tokens are not nodes."""
    nl = parse_text(
        "t\n"
        "X1 in out amp gain = 3 bw={2*f}\n"
        "X2 in out params: x=1 amp\n"
        "X3 in out w=1 l=2 amp\n"
        ".subckt amp a b params: gain=1 bw=1\n"
        ".param inner=2\n"
        "R1 a b {gain*inner}\n"
        ".ends amp\n"
    )
    x1 = nl.element("x1")
    assert x1.nodes == ("in", "out") and x1.model == "amp" and x1.params == (("gain", "3"), ("bw", "{2*f}"))
    x3 = nl.element("x3")
    assert x3.nodes == ("in", "out") and x3.model == "amp"
    sub = nl.subcircuits["amp"]
    assert sub.pins == ("a", "b") and sub.params == (("gain", "1"), ("bw", "1"))
    assert isinstance(sub.body[0], Directive) and sub.body[0].keyword == ".param"


def test_nested_subcircuit_definitions():
    """A .subckt inside a .subckt is kept in its parent's body and its instances find it."""
    nl = parse_text(
        "t\n.subckt outer a b\n.subckt inner p q\nR1 p q 1\n.ends inner\nXi a b inner\n.ends outer\nXo 1 2 outer\n"
    )
    outer = nl.subcircuits["outer"]
    assert "inner" in outer.subcircuits and "inner" not in nl.subcircuits
    assert outer.elements[0].pins == ("p", "q")
    assert not nl.warnings


def test_directives_kept_and_analyses_set_aside():
    """Model, param, option and conditional statements are kept; analyses, output and .control blocks go to ignored."""
    nl = parse_text(
        "t\n.param r=1k\n.options reltol=1e-4\n.temp 50\n.func f(x) {2*x}\n.csparam a=1\n"
        ".nodeset v(a)=1\n.ic v(a)=0\n.if (r > 1)\nR1 a 0 {r}\n.else\nR1 a 0 1\n.endif\n"
        ".model dm d is=1e-14\n.op\n.ac dec 10 1 1g\n.tran 1n 1u\n.meas tran x max v(a)\n"
        ".save all\n.print op v(a)\n.plot ac v(a)\n.four 1k v(a)\n.noise v(a) V1 dec 1 1 2\n"
        ".control\nshell rm -rf /tmp/should-never-run\nrun\n.endc\n.end\nR99 never read 1\n"
    )
    kws = [d.keyword for d in nl.directives]
    assert kws == [".param", ".options", ".temp", ".func", ".csparam", ".nodeset", ".ic", ".if", ".else", ".endif", ".model"]
    ignored = [d.keyword for d in nl.ignored]
    assert ignored == [".op", ".ac", ".tran", ".meas", ".save", ".print", ".plot", ".four", ".noise", ".control"]
    control = nl.ignored[-1]
    assert "shell rm" in control.text and control.location.line == 24
    assert [e.name for e in nl.elements] == ["R1", "R1"]  # .end stops reading


def test_includes_and_library_sections_relative_paths(tmp_path):
    """.include and .lib resolve relative to the including file, read only the named section, and record files and sections."""
    lib = tmp_path / "models"
    lib.mkdir()
    (lib / "corners.lib").write_text(
        "* corner library\n.lib typ\n.param k=1\n.include 'parts/typ.inc'\n.endl typ\n"
        ".lib slow\n.param k=2\nR_never a b 1\n.endl slow\n"
    )
    (lib / "parts").mkdir()
    (lib / "parts" / "typ.inc").write_text("* typical parts\n.model dm d is=1e-14\n.subckt cell a b\nD1 a b dm\n.ends\n")
    top = tmp_path / "top.cir"
    top.write_text('top\n.lib "models/corners.lib" typ\n.inc models/parts/../parts/typ.inc\nX1 1 0 cell\n')
    nl = parse_file(top)
    assert nl.files[0] == str(top)
    assert str(lib / "corners.lib") in nl.files and str(lib / "parts" / "typ.inc") in nl.files
    assert nl.lib_sections == ((str(lib / "corners.lib"), "typ"),)
    params = [d.text for d in nl.directives if d.keyword == ".param"]
    assert params == [".param k=1"]  # the slow section is never read
    assert nl.statements[1].location.file == str(lib / "parts" / "typ.inc")
    assert "cell" in nl.subcircuits and nl.element("x1").pins == ("a", "b")


def test_include_of_missing_file_names_the_line(tmp_path):
    """An .include of a missing file is a NetlistError naming the including file and line."""
    top = tmp_path / "top.cir"
    top.write_text("t\nR1 a 0 1\n.include nothere.inc\n")
    with pytest.raises(NetlistError, match=re.escape(f"{top}:3:1: cannot read") + ".*nothere.inc"):
        parse_file(top)


def test_missing_library_section(tmp_path):
    """A .lib call naming a section the file lacks is a NetlistError listing the sections it has."""
    (tmp_path / "l.lib").write_text(".lib tt\n.endl\n")
    with pytest.raises(NetlistError, match="no section 'ff'.*tt"):
        parse_text("t\n.lib l.lib ff\n", base_dir=str(tmp_path))


def test_syntax_error_shows_file_line_column_and_caret():
    """'R1 a' is a NetlistSyntaxError at file:line:column with the line, a caret and what was expected."""
    with pytest.raises(NetlistSyntaxError) as info:
        parse_text("t\nR0 x 0 1\nR1 a\n", source="amp.cir")
    msg = str(info.value)
    assert msg.splitlines()[0] == "amp.cir:3:6: R1: expected 2 nodes and a value"
    assert msg.splitlines()[1].strip() == "R1 a"
    assert msg.splitlines()[2].index("^") == msg.splitlines()[1].index("R1") + 5


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("t\nM1 d g s nch\n", "expected 4 nodes and a model"),
        ("t\nY1 a b 1\n", "unknown element type"),
        ("t\n+ r=1\n", "continuation"),
        ("t\n.subckt a p\nR1 p 0 1\n", "expected .ends"),
        ("t\n.ends\n", ".ends without"),
        ("t\nE1 o 0 POLY(2) a 0\n", "expected 4 controlling nodes"),
        ("t\nX1 a b sub\n.subckt sub p\n.ends\n", "has 1 pins"),
        ("t\nR1 a=1 b 1\n", "expected a node name"),
        ("t\n.lib models.lib\nR1 a 0 1\n", "section with no .endl"),
    ],
)
def test_malformed_lines(text, expected):
    """Each malformed construct gives a NetlistSyntaxError saying what was expected."""
    with pytest.raises(NetlistSyntaxError, match=expected):
        parse_text(text)


def test_warnings_for_undefined_model_and_subcircuit():
    """Undefined models and subcircuits are warnings with the card's location, not errors; the instance of a missing
    definition has positional pins."""
    nl = parse_text("t\nM1 d g 0 0 nope\nX1 a b missing\nD1 a 0 dm.3\n.model dm.3 d\n")
    assert any("<string>:2:1" in w and "nope" in w for w in nl.warnings)
    assert any("<string>:3:1" in w and "missing" in w for w in nl.warnings)
    assert not any("dm.3" in w for w in nl.warnings)
    assert nl.element("x1").pins == ("1", "2")  # no definition names its pins: they keep their places, as ngspice connects them


def test_records_are_frozen_records():
    """Parsed statements are the frozen records of netloop.netlist.model."""
    nl = parse_text("t\n.subckt s a\nR1 a 0 1\n.ends\nX1 n s\n")
    assert isinstance(nl.statements[0], Subcircuit) and isinstance(nl.statements[1], Element)
    with pytest.raises(AttributeError):
        nl.statements[1].name = "X2"


def test_unknown_subcircuit_query_suggests_close_names():
    """Asking for a subcircuit the netlist lacks raises UnknownNodeError with the close names."""
    nl = parse_text("t\n.subckt opamp a b\nR1 a b 1\n.ends\n")
    assert nl.subcircuit("OPAMP").name == "opamp"
    with pytest.raises(UnknownNodeError) as info:
        nl.subcircuit("opamp2")
    assert info.value.suggestions == ("opamp",)
    assert "did you mean 'opamp'" in str(info.value)


def test_xspice_vector_connections():
    """XSPICE A cards (ngspice manual, XSPICE instance lines): nodes inside [ ] vectors and after %-prefixes are node slots;
    the model is the last token; a one-port model has one connection."""
    nl = parse_text("t\nA1 [IN1 in2] %v OUT amod\nA2 clk src\n.model amod d_and\n.model src d_osc\n")
    a1 = nl.element("a1")
    assert a1.nodes == ("in1", "in2", "out") and a1.model == "amod"
    assert a1.pins == ("a1", "a2", "a3")  # netloop's own labels, one per connection in card order (cards.py)
    assert (nl.element("a2").nodes, nl.element("a2").model) == (("clk",), "src")  # one connection and a model: the least an A card has
    assert a1.tokens[0] == "[" and a1.tokens[4] == "%v"


def test_fast_path_cards_are_ordinary_records():
    """Plain two-terminal cards (read on the fast path) equal, hash and freeze like records built the ordinary way."""
    from netloop.netlist import SourceLocation

    fast = parse_text("t\nR1 A B 1k\nV2 A 0 dc 1 ac 1\n").elements
    assert fast[0] == Element("R1", ("a", "b", "1k"), (0, 1), ("p", "n"), SourceLocation("<string>", 2, 1), None)
    assert fast[1] == Element("V2", ("a", "0", "dc", "1", "ac", "1"), (0, 1), ("p", "n"), SourceLocation("<string>", 3), None)
    assert hash(fast[0].location) == hash(SourceLocation("<string>", 2, 1))
    with pytest.raises(AttributeError):
        fast[0].tokens = ()


def test_ends_with_another_name_closes_innermost_with_warning():
    """'.ends other' closes the innermost open .subckt (as ngspice does) and is reported as a warning."""
    nl = parse_text("t\n.subckt inner a\nR1 a 0 1\n.ends outer\nX1 n inner\n")
    assert "inner" in nl.subcircuits and nl.element("x1").pins == ("a",)
    assert any(".ends outer closes .subckt inner" in w for w in nl.warnings)


@pytest.mark.ngspice
def test_ngspice_also_closes_innermost_on_misnamed_ends(tmp_path, op_of):
    """ngspice reads the misnamed .ends the same way: X1's 1k resistor draws 1 mA from the 1 V source."""
    deck = "t\n.subckt inner a\nR1 a 0 1k\n.ends outer\nV1 n 0 1\nX1 n inner\n.end\n"
    op = op_of(deck, tmp_path)  # reference: ngspice op
    assert abs(op["v1#branch"] + 1e-3) < 1e-9
    assert parse_text(deck).subcircuit("inner").elements[0].name == "R1"


DOLLARS = """dollar comments
V1 in 0 dc 1
R1 in mid$a 1k $ a comment
R2 mid$a 0 3k $a comment glued to its dollar
R3 mid$a x$ 1k\t$\ttabbed
R4 x$ 0 1k $$ two
.end
"""


@pytest.mark.ngspice
def test_dollar_starts_a_comment_only_after_a_space(tmp_path, listing_of):
    """`$` after a space or tab starts a comment, whatever follows it; inside a name (mid$a, x$) it is part of the name, as ngspice reads them."""
    ours = [" ".join((e.name, *e.tokens)).lower() for e in parse_text(DOLLARS).elements]
    assert ours == listing_of(DOLLARS, tmp_path)[1:]  # reference: ngspice 39 `listing e` (after its title line)
    assert ours[2] == "r2 mid$a 0 3k"


BJT_CAPITALS = """bjt whose model is named in capitals
V1 vcc 0 dc 5
V2 bb 0 dc 0.8
RB bb b 100k
RC vcc c 1k
RC2 vcc c2 2k
.model qn npn bf=100
Q1 c b 0 QN off
Q2 c2 b 0 QLATE off
.model qlate npn bf=50
.end
"""


@pytest.mark.ngspice
def test_bjt_model_name_is_matched_whatever_its_case(tmp_path, op_of):
    """`Q1 c b 0 QN off` with `.model qn` before or after it: QN is the model (names ignore case), so Q1 has three nodes, as ngspice's op has no node qn."""
    nl = parse_text(BJT_CAPITALS)
    for name, collector, model in (("q1", "c", "qn"), ("q2", "c2", "qlate")):
        q = nl.element(name)
        assert q.nodes == (collector, "b", "0") and q.pins == ("c", "b", "e") and q.model == model
    assert not nl.warnings
    assert resolve_bjt(("c", "b", "0", "QN", "off"), {"qn"}) == 3  # the card as written, against the lower-case model names
    nodes = {n for e in nl.elements for n in e.nodes} - {"0"}
    op = op_of(BJT_CAPITALS, tmp_path)  # reference: ngspice op, which names every node it solved for
    assert nodes == {name for name in op if "#" not in name}
    assert op["c"] < 5.0 and op["c2"] < 5.0  # both conduct: ngspice found their models


def test_quoted_and_unquoted_include_and_library_paths(tmp_path):
    """Paths may be quoted (and then hold spaces), the section word is read in any case, and each inclusion says what it was."""
    folder = tmp_path / "my models"
    folder.mkdir()
    (folder / "c.lib").write_text(".lib tt\n.param k=1\n.endl tt\n")
    (folder / "a b.inc").write_text("R2 b 0 2k\n")
    (tmp_path / "plain.inc").write_text("R3 c 0 3k\n")
    top = tmp_path / "top.cir"
    top.write_text('t\n.lib "my models/c.lib" TT\n.include \'my models/a b.inc\'\n.inc plain.inc\n.include "plain.inc\nR1 a 0 1k\n')
    nl = parse_file(top)
    assert nl.lib_sections == ((str(folder / "c.lib"), "tt"),)
    assert [(i.kind, i.path, i.section) for i in nl.inclusions] == [
        ("lib", str(folder / "c.lib"), "tt"), ("include", str(folder / "a b.inc"), None),
        ("include", str(tmp_path / "plain.inc"), None), ("include", str(tmp_path / "plain.inc"), None)]  # an unclosed quote runs to the end
    assert [i.location.line for i in nl.inclusions] == [2, 3, 4, 5]
    assert [e.name for e in nl.elements] == ["R2", "R3", "R3", "R1"]


def test_binned_model_names_count_for_their_base_name():
    """`.model nch.1 nmos` (an ngspice model bin) defines nch for M cards; `.model a.b` and `.model .2` define only their own names."""
    nl = parse_text("t\n.model nch.1 nmos\n.model pch.x pmos\n.model .2 nmos\n.model\nM1 d g 0 0 nch\nM2 d g 0 0 pch\nM3 d g 0 0 pch.x\n")
    assert [w.split(": ", 1)[1] for w in nl.warnings] == ["M2: undefined model 'pch'"]


def test_undefined_model_is_found_without_any_model_card():
    """A diode whose model is defined nowhere (and no .model at all) is still warned about."""
    nl = parse_text("t\nD1 a 0 dnone\nR1 a 0 1k\n", source="d.cir")
    assert nl.warnings == ("d.cir:2:1: D1: undefined model 'dnone'",)


def test_global_nets_are_lower_case_once_each_in_order():
    """.global names are recorded lower-case, first appearance first, each once."""
    nl = parse_text("t\n.global VDD gnd\n.GLOBAL vdd Vss\nR1 vdd 0 1\n")
    assert nl.globals == ("vdd", "gnd", "vss")
    assert [d.keyword for d in nl.directives] == [".global", ".global"]


def test_subcircuit_header_pins_and_parameters():
    """Pins before params: (lower-case), key=value anywhere, and bare names after params: as parameters without a default; each
    definition is located at its .subckt line."""
    nl = parse_text("t\n.SUBCKT Amp IN Out params: Gain=2 bw\n.ends\n.subckt b x y params:k=1 w = 3\n.ends b\n.subckt c p q=4\n.ends\n")
    amp, b, c = nl.subcircuit("amp"), nl.subcircuit("b"), nl.subcircuit("c")
    assert (amp.pins, amp.params, amp.header) == (("in", "out"), (("gain", "2"), ("bw", "")), ".SUBCKT Amp IN Out params: Gain=2 bw")
    assert (b.pins, b.params) == (("x", "y"), (("k", "1"), ("w", "3")))
    assert (c.pins, c.params) == (("p",), (("q", "4"),))
    assert [(s.location.line, s.location.column) for s in (amp, b, c)] == [(2, 1), (4, 1), (6, 1)]  # each at its .subckt line
    assert not nl.warnings


def test_misnamed_ends_and_unknown_statements_are_warnings_with_their_place():
    """'.ends other' and a dot statement netloop does not know are each one warning at file:line, and reading goes on."""
    nl = parse_text("t\n.subckt inner a\nR1 a 0 1\n.ends outer\n.frobnicate x=1\nR2 b 0 1\n", source="w.cir")
    assert nl.warnings == ("w.cir:4:1: .ends outer closes .subckt inner (the innermost open definition)",
                           "w.cir:5:1: unknown statement .frobnicate kept verbatim")
    assert [(d.keyword, d.text, d.location.line) for d in nl.directives] == [(".frobnicate", ".frobnicate x=1", 5)]


def test_set_aside_statements_keep_their_text_and_place(tmp_path):
    """Analyses and .control blocks set aside in Netlist.ignored keep their text, file and line (also from an included file)."""
    (tmp_path / "runs.inc").write_text(".tran 1n 1u\n.control\nrun\n.endc\n")
    top = tmp_path / "top.cir"
    top.write_text("t\nR1 a 0 1\n.ac dec 10 1 1g\n.include runs.inc\n")
    ignored = parse_file(top).ignored
    assert [(d.keyword, d.text, d.location.file, d.location.line) for d in ignored] == [
        (".ac", ".ac dec 10 1 1g", str(top), 3), (".tran", ".tran 1n 1u", str(tmp_path / "runs.inc"), 1),
        (".control", ".control\nrun\n.endc", str(tmp_path / "runs.inc"), 2)]


def test_included_file_with_bytes_that_are_not_utf8_is_read(tmp_path):
    """A library whose comments hold Latin-1 bytes (as old vendor files do) is read; the bad bytes become replacement characters."""
    (tmp_path / "old.lib").write_bytes(b"* \xb5A model, \xa9 vendor\n.model dold d is=1e-14\n")
    top = tmp_path / "top.cir"
    top.write_text("t\n.include old.lib\nD1 a 0 dold\n")
    nl = parse_file(top)
    assert not nl.warnings and nl.directives[0].text == ".model dold d is=1e-14"


def test_spiceinit_beside_a_netlist_read_from_elsewhere(tmp_path, monkeypatch):
    """A .spiceinit next to the netlist but not in the current folder gives one warning quoting its set/option lines; none from its own folder."""
    folder = tmp_path / "bench"
    folder.mkdir()
    (folder / ".spiceinit").write_text("* init\nset ngbehavior=hsa\n  option klu\necho hi\n")
    net = folder / "n.cir"
    net.write_text("t\nR1 a 0 1\n")
    monkeypatch.chdir(tmp_path)
    (note,) = parse_file(net).warnings
    init = folder / ".spiceinit"
    assert note == (f"{init} (it says: set ngbehavior=hsa; option klu) is not read: ngspice reads .spiceinit only from the folder it "
                    f"runs in (netloop runs it in the current folder, {tmp_path}); run netloop from {folder} or copy the file to the current folder")
    (folder / ".spiceinit").write_text("echo nothing to set\n")
    assert parse_file(net).warnings[0].startswith(f"{init} is not read:")
    monkeypatch.chdir(folder)
    assert parse_file(net).warnings == ()


def test_bjt_fifth_token_decides_the_substrate_only_when_it_is_a_name():
    """With its model defined nowhere, `Q1 c b e qnone area=2` still has three nodes (area=2 is a parameter); `Q2 c b e s XQ` has a substrate s and model xq."""
    nl = parse_text("t\nQ1 c b e qnone area=2\nQ2 c b e s XQ\n.model xq npn\n", source="q.cir")
    q1, q2 = nl.element("q1"), nl.element("q2")
    assert (q1.nodes, q1.model) == (("c", "b", "e"), "qnone")
    assert (q2.nodes, q2.pins, q2.model) == (("c", "b", "e", "s"), ("c", "b", "e", "sub"), "xq")
    assert nl.warnings == ("q.cir:2:1: Q1: undefined model 'qnone'",)
    assert nl.source == "q.cir"
    q3 = parse_text("t\n.model QA npn\nQ3 c b e QA off\n").element("q3")  # "off" is a keyword, not a substrate node
    assert (q3.nodes, q3.model, q3.tokens[3]) == (("c", "b", "e"), "qa", "QA")  # the model name stays as written in the tokens


def test_controlling_node_named_like_poly_is_a_node():
    """A linear E/G card whose first controlling node is named "polyin" is the four-node form (ngspice manual, linear
    VCVS/VCCS: N+ N- NC+ NC- VALUE), not a POLY(n) form; and only F, H and W cards have controlling sources."""
    nl = parse_text("t\nE1 out 0 polyin 0 10\nG1 0 o2 poly 0 1m\nX1 a b sub\n.subckt sub p q\nR1 p q 1\n.ends\n")
    assert nl.element("e1").nodes == ("out", "0", "polyin", "0") and nl.element("e1").pins == ("p", "n", "cp", "cn")
    assert nl.element("g1").nodes == ("0", "o2", "poly", "0")
    assert [controlling_sources(nl.element(n)) for n in ("e1", "g1", "x1")] == [(), (), ()]


POLY_ONE_COEFFICIENT = """poly cards with one coefficient each, and a node named poly2 (invented)
va a 0 dc 2
vb b 0 dc 3
e2 o 0 poly(2) a 0 b 0 1
r1 o 0 1k
h1 q 0 poly(1) va 2
r2 q 0 1k
vp poly2 0 dc 2
e3 lin 0 poly2 0 10
r3 lin 0 1k
"""


@pytest.mark.ngspice
def test_poly_cards_with_a_single_coefficient(tmp_path, op_of):
    """A POLY(n) card with its controlling nodes or sources and one coefficient (p0) is read, as ngspice 39 reads it:
    its op gives v(o) = p0 = 1 and v(q) = 2 (with no coefficient at all both refuse the card, see test_errors); a node
    named poly2 is a node, and its linear source gives 10 * 2 V."""
    nl = parse_text(POLY_ONE_COEFFICIENT)
    assert nl.element("e2").nodes == ("o", "0", "a", "0", "b", "0")
    assert nl.element("h1").nodes == ("q", "0") and controlling_sources(nl.element("h1")) == ("va",)
    assert nl.element("e3").nodes == ("lin", "0", "poly2", "0")  # a linear source: poly2 is a node, not POLY(2)
    op = op_of(POLY_ONE_COEFFICIENT, tmp_path)  # reference: ngspice's own operating point
    assert (op["o"], op["q"], op["lin"]) == (pytest.approx(1.0), pytest.approx(2.0), pytest.approx(20.0))


def test_laplace_and_freq_forms_have_only_output_nodes():
    """E/G cards in the LAPLACE and FREQ behavioural forms (PSpice's syntax, from memory) connect only their two output nodes;
    a value written in quotes with spaces is one token, also on a plain two-terminal card."""
    nl = parse_text("t\nE1 o 0 LAPLACE {V(a)} = {1/(1+s)}\nG1 0 p FREQ {V(a)} = (0,0,0) (1k,-3,-45)\nR1 a b 'x * 2'\n")
    assert nl.element("e1").nodes == ("o", "0") and nl.element("g1").nodes == ("0", "p")
    assert nl.element("r1").tokens == ("a", "b", "'x * 2'")


def test_section_definitions_in_the_read_file_are_skipped(tmp_path):
    """A `.lib NAME` ... `.endl` section in the file being read is only a definition (ngspice manual, .lib): its statements
    are skipped, and reading goes on after its `.endl`."""
    top = tmp_path / "top.cir"
    top.write_text("t\nR1 a 0 1k\n.lib tt\nR5 x 0 5k\n.control\n.endl\n.endc\n.ENDL tt\nR2 a 0 2k\n")
    nl = parse_file(top)
    assert [e.name for e in nl.elements] == ["R1", "R2"] and nl.ignored == () and nl.warnings == ()


def test_text_without_a_file(tmp_path, monkeypatch):
    """parse_text reads no file: the source is "<string>" (or the name given), files lists none but a named source, includes
    resolve against the current folder when no base_dir is given, and empty text has an empty title."""
    (tmp_path / "p.inc").write_text("R2 b 0 2k\n")
    monkeypatch.chdir(tmp_path)
    nl = parse_text("t\n.include p.inc\nR1 a b 1k\n")
    assert (nl.source, nl.files, [e.name for e in nl.elements]) == ("<string>", (str(tmp_path / "p.inc"),), ["R2", "R1"])
    named = parse_text("t\nR1 a b 1k\n", source="amp.cir")
    assert (named.source, named.files) == ("amp.cir", ("amp.cir",))
    assert parse_text("").title == ""


def test_subcircuit_parameters_after_a_glued_params_word_and_with_comparisons():
    """After `params:k=1` (the word glued to the first parameter) a bare name is a parameter without a default, and a
    default holding '==' keeps everything after the first '=' (ngspice expressions compare with ==)."""
    sub = parse_text("t\n.subckt c p params:k=1 w sel={m==1}\n.ends\n").subcircuit("c")
    assert (sub.pins, sub.params) == (("p",), (("k", "1"), ("w", ""), ("sel", "{m==1}")))
