"""Physical lines to statements and statements to tokens: comments, continuations, .control blocks, brace and quote groups, columns."""

from __future__ import annotations

import pytest

from netloop.netlist import parse_text
from netloop.netlist.lines import logical_lines, token_columns, tokenize

CONTINUED = """continuations and a control block
V1 a 0 dc 1
C1 a 0

* a comment between the card and its continuation
+10p
R1 a b 1k
.control
let x = 1   
echo MAX
.endc ; back to the netlist
R2 b 0 1k
.end
"""


@pytest.mark.ngspice
def test_continuations_and_control_block_as_ngspice_reads_them(tmp_path, listing_of):
    """'+10p' (no space) continues C1 across a blank and a comment line; '.endc ; ...' closes the block; the cards equal ngspice's listing."""
    nl = parse_text(CONTINUED)
    ours = [" ".join((e.name, *e.tokens)).lower() for e in nl.elements]
    assert ours == listing_of(CONTINUED, tmp_path)[1:]  # reference: ngspice 39 `listing e` (after its title line)
    (control,) = nl.ignored
    assert control.text == ".control\nlet x = 1   \necho MAX\n.endc ; back to the netlist"  # verbatim, trailing spaces kept
    assert control.location.line == 8


def test_unclosed_control_block_runs_to_the_end_of_the_file():
    """A .control block with no .endc takes every line after it (nothing inside it is netlist syntax)."""
    nl = parse_text("t\nR1 a 0 1k\n.CONTROL\nop\nR2 a 0 1k")
    assert [e.name for e in nl.elements] == ["R1"]
    assert nl.ignored[0].text == ".CONTROL\nop\nR2 a 0 1k"


@pytest.mark.parametrize("text,expected", [
    ("R1 a b 1k ; a semicolon comment\n", ["R1 a b 1k"]),
    ("R1 a b 1k $ a dollar comment\n", ["R1 a b 1k"]),
    ("R1 a b 1k\n+ ; nothing but a comment\nR2 b 0 1\n", ["R1 a b 1k", "R2 b 0 1"]),
    ("R1 a b\n+ 1k ; the value\n\n   \n* note\nR2 b 0 1\n", ["R1 a b 1k", "R2 b 0 1"]),
    ("; only a comment\nR2 b 0 1\n", ["R2 b 0 1"]),
    ("R1 a b 1k ; one ; two\n", ["R1 a b 1k"]),  # the first ; ends the card
    ("C1 a 0\n+10p\n", ["C1 a 0 10p"]),  # '+' with no space, as in the ngspice listing test above
    ("R1 a b 1k\nR2 b 0\n+ 2k\n", ["R1 a b 1k", "R2 b 0 2k"]),  # the last statement continued once
])
def test_logical_lines_strip_comments_and_join_continuations(text, expected):
    """Whether or not a file needs the slow path (comments, continuations), the statements come out the same."""
    assert [t for t, _, _ in logical_lines(text.splitlines())] == expected


@pytest.mark.parametrize("text,tokens", [
    ("R1 a b 1k", ["R1", "a", "b", "1k"]),
    ("R1 a b r = 1k", ["R1", "a", "b", "r=1k"]),
    ("B1 o 0 v = 'v(a) * 2' tc1 = {k * 2}", ["B1", "o", "0", "v='v(a) * 2'", "tc1={k * 2}"]),
    ("E1 o 0 value = {v(a)*{g + 1}} x", ["E1", "o", "0", "value={v(a)*{g + 1}}", "x"]),
    ("B1 o 0 v = {a*{b} + c} d", ["B1", "o", "0", "v={a*{b} + c}", "d"]),
    ("R1 a b r = 'x * 2'", ["R1", "a", "b", "r='x * 2'"]),
    (".param s = 'a b' t={1 + 2}", [".param", "s='a b'", "t={1 + 2}"]),
    ("X1 a} b sub", ["X1", "a}", "b", "sub"]),
    ("X1 {a b} c' d'", ["X1", "{a b}", "c' d'"]),
])
def test_tokens_keep_brace_and_quote_groups_whole(text, tokens):
    """Spaces inside {...} (nested too) and '...' do not split a token; 'key = value' becomes one token; a stray '}' is a plain character."""
    assert tokenize(text) == tokens


def test_token_columns_are_one_based_starts():
    """Each whitespace-separated piece's 1-based start column, for carets under the fault."""
    text = "  R1  a\tb 1k"
    assert token_columns(text) == [text.index("R1") + 1, text.index("a") + 1, text.index("b") + 1, text.index("1k") + 1]
    assert token_columns("R1") == [1] and token_columns("") == []


def test_control_path_strips_comments_and_joins_like_the_joined_path():
    """A file with a .control block (read on the general path) gives the statements the same file without it gives on the
    joined path (an independent implementation, itself checked against ngspice's listing above), the block kept verbatim
    with the trailing spaces of its .control line."""
    body = "; only a comment\nC1 a 0 ; c\n+10p $ d\nR1 a b 1k ; one ; two\nR2 b 0\n+ 2k\nR3 b 0\n+ 3k\n"
    control = ".control   \n  op  \n.endc"
    plain = logical_lines(body.splitlines())
    assert [t for t, _, _ in plain] == ["C1 a 0 10p", "R1 a b 1k", "R2 b 0 2k", "R3 b 0 3k"]
    assert logical_lines((body + control).splitlines()) == [*plain, (control, 9, True)]  # the block starts on line 9
