"""The netlist records: copies with other nodes or names, lookups by name, and the fast two-terminal constructor."""

from __future__ import annotations

import pytest

from netloop.errors import UnknownNodeError
from netloop.netlist import Element, SourceLocation, parse_text
from netloop.netlist.cards import _two_terminal_constructor, two_terminal

DECK = "t\nRload out vdd 1k\nM1 d g s b nch w=1u\n.subckt amp in out\nR1 in out 1k\n.ends\nX1 a b amp\n"


def test_with_nodes_replaces_only_the_node_slots():
    """with_nodes puts new names in the node slots, in card order, and leaves the model and parameters as written."""
    m1 = parse_text(DECK).element("m1")
    moved = m1.with_nodes(("d2", "g", "s", "b"))
    assert moved.tokens == ("d2", "g", "s", "b", "nch", "w=1u") and moved.nodes == ("d2", "g", "s", "b")
    assert (moved.name, moved.pins, moved.model, moved.location) == (m1.name, m1.pins, m1.model, m1.location)
    assert m1.nodes == ("d", "g", "s", "b")  # the original record is unchanged
    with pytest.raises(ValueError, match="M1: expected 4 nodes, got 2"):
        m1.with_nodes(("a", "b"))


def test_renamed_keeps_the_kind():
    """renamed gives a copy under a new name of the same letter (either case) and refuses one that would change the kind."""
    r = parse_text(DECK).element("rload")
    copy = r.renamed("rcopy")
    assert copy.name == "rcopy" and copy.kind == "R" and copy.tokens == r.tokens and r.name == "Rload"
    with pytest.raises(ValueError, match="renaming Rload to Cload would change its kind"):
        r.renamed("Cload")


@pytest.mark.parametrize("lookup,name,message", [
    ("element", "rlod", "unknown element 'rlod'; did you mean 'rload'?"),
    ("subcircuit", "ampp", "unknown subcircuit 'ampp'; did you mean 'amp'?"),
])
def test_lookups_ignore_case_and_suggest_close_names(lookup, name, message):
    """element() and subcircuit() find names in any case; a miss is an UnknownNodeError naming what was looked for, with the close names (difflib)."""
    nl = parse_text(DECK)
    assert nl.element("RLOAD") is nl.element("rload") and nl.subcircuit("AMP").name == "amp"
    with pytest.raises(UnknownNodeError) as info:
        getattr(nl, lookup)(name)
    assert str(info.value) == message


@pytest.mark.parametrize("fresh", [False, True], ids=["module", "built-here"])
@pytest.mark.parametrize("toks", [["R1", "A", "Out", "1k"], ["C2", "x", "0", "1p", "ic=0"]])
def test_two_terminal_constructor_called_in_the_test_makes_the_dataclass_records(fresh, toks):
    """The slot-setting constructor makes exactly the Element and SourceLocation that the dataclass constructors make."""
    # built inside the test, not at collection: the constructor runs once at import, and a mutation tool that
    # switches mutants after importing the tests reaches the constructor's body only through a call made here
    make = _two_terminal_constructor() if fresh else two_terminal
    made = make(toks, "f.cir", 7)
    name, a, b, *rest = toks
    ref = Element(name, (a.lower(), b.lower(), *rest), (0, 1), ("p", "n"), SourceLocation("f.cir", 7, 1), None)  # reference: the dataclass itself
    assert made == ref and made.location == ref.location and made.model is None
    assert made.nodes == ref.nodes == (a.lower(), b.lower())
    assert (made.name, made.tokens, made.node_slots, made.pins) == (ref.name, ref.tokens, ref.node_slots, ref.pins)
    assert (made.location.file, made.location.line, made.location.column) == ("f.cir", 7, 1)


def test_params_are_the_key_value_tokens_and_nothing_quoted_or_braced():
    """Element.params: every key=value token in card order, split at its first "=" (a value may hold another); a token
    that starts with a brace or a quote is an expression, not a parameter, whatever it holds."""
    x1 = parse_text("t\nX1 a b amp w={l==1?2:3} {a=b} 'c=d' M=2\n.subckt amp p q\nR1 p q 1k\n.ends\n").element("x1")
    assert x1.params == (("w", "{l==1?2:3}"), ("m", "2"))


def test_a_copy_with_other_statements_lists_its_own_elements():
    """A copy made with dataclasses.replace shares the lookup cache of the netlist it came from; its elements are its
    own statements' all the same."""
    from dataclasses import replace

    net = parse_text(DECK)
    assert [e.name for e in net.elements] == ["Rload", "M1", "X1"]  # cached now
    fewer = replace(net, statements=tuple(s for s in net.statements if getattr(s, "name", "") != "M1"))
    assert [e.name for e in fewer.elements] == ["Rload", "X1"] and [e.name for e in net.elements] == ["Rload", "M1", "X1"]
