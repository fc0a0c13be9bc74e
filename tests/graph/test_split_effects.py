"""split_effects: which loops a given split of a node opens and which stay closed, on a netlist whose loops are known by construction."""

from __future__ import annotations

from netloop.graph import flatten
from netloop.graph.loops import find_loops
from netloop.graph.split_effects import CLOSED_LOAD, LOCAL, NOT_THROUGH, OPENED, NodeSplit, apply_splits, loop_fates
from netloop.netlist import parse_text

# A global loop a -> b -> c -> a of transconductance stages, and a capacitor Cc from c back to b, the
# controlling input of the stage Gd that drives c (a Miller-like local loop around that stage).
# By construction the loops are: G = a -gab-> b -gd-> c -gca-> a (global, through the stage),
# F = a -gab-> b -cc-> c -gca-> a (global, forward through Cc), L = b -gd-> c -cc-> b (local, around Gd).
LOCAL_AND_GLOBAL = """global loop with a local capacitor around one stage (invented)
Gab 0 b a 0 1m
Gd 0 c b 0 1m
Gca 0 a c 0 1m
Cc c b 1p
Ra a 0 1k
Rb b 0 1k
Rc c 0 1k
.end
"""


def _setup():
    circuit = flatten(parse_text(LOCAL_AND_GLOBAL))
    (group,) = find_loops(circuit).groups
    names = {}
    for k, lp in enumerate(group.loops, 1):
        els = set(lp.elements)
        names["L" if els == {"gd", "cc"} else "G" if "gd" in els else "F"] = k
    return circuit, group, names


def test_the_three_loops_are_found():
    """The netlist has exactly the global loop, the forward loop through Cc and the local loop around Gd."""
    # Reference: by construction (see LOCAL_AND_GLOBAL).
    _, group, names = _setup()
    assert sorted(names) == ["F", "G", "L"] and len(group.loops) == 3


def test_cc_with_the_driver_keeps_the_local_loop_closed_and_opens_the_global_ones():
    """At c, with Gd's output and Cc on the driver side and Gca's input on the load side, G and F are opened and L stays closed as local."""
    # Reference: by construction: G enters c by gd.n (driver) and leaves by gca.cp (load); F enters by cc.p
    # (driver) and leaves by gca.cp; L enters by gd.n and leaves by cc.p, both on the driver side, through an active output.
    circuit, group, n = _setup()
    split = NodeSplit("c", ("gd.n", "cc.p"), ("gca.cp",), {("gd", "n"): "driver", ("cc", "p"): "driver", ("gca", "cp"): "load"})
    fates = {f.number: f.fate for f in loop_fates(circuit, group.loops, split)}
    assert fates == {n["G"]: OPENED, n["F"]: OPENED, n["L"]: LOCAL}


def test_cc_on_the_load_side_opens_the_local_loop_and_closes_the_forward_one():
    """At c, with only Gd's output on the driver side, L is opened instead and F enters and leaves on the load side."""
    # Reference: by construction: with cc.p on the load side, L runs gd.n (driver) -> cc.p (load): opened;
    # F runs cc.p (load) -> gca.cp (load): closed on the load side.
    circuit, group, n = _setup()
    split = NodeSplit("c", ("gd.n",), ("cc.p", "gca.cp"), {("gd", "n"): "driver"})  # unlisted terminals are on the load side
    fates = {f.number: f.fate for f in loop_fates(circuit, group.loops, split)}
    assert fates == {n["G"]: OPENED, n["F"]: CLOSED_LOAD, n["L"]: OPENED}


def test_a_node_off_a_loop_leaves_it_closed():
    """At a, the local loop L does not pass the node, whatever the split."""
    # Reference: by construction, L = {b, c}.
    circuit, group, n = _setup()
    split = NodeSplit("a", ("gca.n",), ("gab.cp",), {("gca", "n"): "driver"})
    fates = {f.number: f.fate for f in loop_fates(circuit, group.loops, split)}
    assert fates == {n["G"]: OPENED, n["F"]: OPENED, n["L"]: NOT_THROUGH}


def test_apply_splits_restates_and_reranks():
    """A node whose split opens nothing goes below those that open the global loops; a refused node goes last; reasons say what is closed."""
    # Reference: by construction: at b, with gab.n alone on the driver side, G, F are opened and L enters by cc
    # and leaves by gd.cp, both on the load side; a split of c that puts every terminal on the load side opens nothing.
    circuit, group, n = _setup()
    splits = {
        "c": NodeSplit("c", ("gd.n", "cc.p"), ("gca.cp",), {("gd", "n"): "driver", ("cc", "p"): "driver"}),
        "b": NodeSplit("b", ("gab.n",), ("gd.cp", "cc.n"), {("gab", "n"): "driver"}),
        "a": NodeSplit("a", refused="no driver found"),
    }
    out = apply_splits(circuit, group, splits)
    by = {c.node: c for c in out.candidates}
    assert by["c"].opened == tuple(sorted((n["G"], n["F"]))) and by["c"].kept_closed == (n["L"],) and by["c"].left_closed == (n["L"],)
    assert "as intended" in by["c"].reason and "opens all" not in by["c"].reason
    assert by["b"].kept_closed == (n["L"],) and "enters and leaves b on the load side" in by["b"].reason
    assert out.candidates[-1].node == "a" and out.candidates[-1].refused and not out.candidates[-1].opened
    assert [c.rank for c in out.candidates] == [1, 2, 3]
    nothing = apply_splits(circuit, group, {"c": NodeSplit("c", (), ("gd.n",), {}), "b": splits["b"]})
    assert [c.node for c in nothing.candidates][:2] == ["b", "c"] and "opens none" in nothing.candidates[1].reason


def test_an_expression_that_reads_the_node_by_name_reads_the_load_side():
    """A behavioural source reading v(b) has no terminal on b; it reads the name b, which the split keeps for the load side."""
    # Reference: netloop.probe.break_loop moves only the driver terminals to a new node and leaves the original
    # name on the load side, so v(b) in an expression reads the load side: the loop a -gab-> b -bx-> a is opened.
    circuit = flatten(parse_text("behavioural read (invented)\nGab 0 b a 0 1m\nBx 0 a i=1m*v(b)\nRa a 0 1k\nRb b 0 1k\n.end\n"))
    (group,) = find_loops(circuit).groups
    (fate,) = loop_fates(circuit, group.loops, NodeSplit("b", ("gab.n",), ("rb.p",), {("gab", "n"): "driver"}))
    assert fate.fate == OPENED and fate.way_out == (("bx", ""),)
