"""split_effects: which loops a given split of a node opens and which stay closed, on a netlist whose loops are known by construction."""

from __future__ import annotations

import re
from dataclasses import replace

import pytest

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


def _local_and_global(els: set[str]) -> str:
    return "L" if els == {"gd", "cc"} else "G" if "gd" in els else "F"


def _setup(text: str = LOCAL_AND_GLOBAL, name=_local_and_global):
    """The circuit, its one loop group, and each loop's number by the name ``name`` gives its set of elements."""
    circuit = flatten(parse_text(text))
    (group,) = find_loops(circuit).groups
    return circuit, group, {name(set(lp.elements)): k for k, lp in enumerate(group.loops, 1)}


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
    # a refused break opens no loop: an empty tuple, as the record says (loop_records.BreakCandidate), which `netloop loops
    # --json` lists as [] (netloop/cli/loops_cmd.py)
    assert out.candidates[-1].node == "a" and out.candidates[-1].refused and out.candidates[-1].opened == ()
    assert out.candidates[-1].reason == "the probe cannot break here: no driver found"
    assert out.candidates[-1].left_closed == tuple(range(1, len(group.loops) + 1))  # a break that cannot be made leaves every loop closed
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


def _nums(n, *names):
    return ", ".join(f"1.{k}" for k in sorted(n[x] for x in names))


def _fill(text: str, n) -> str:
    """``text`` with each ``{F, G}`` replaced by those loops' numbers in group 1 (``n``: loop name -> number)."""
    return re.sub(r"\{([\w, ]+)\}", lambda m: _nums(n, *m[1].split(", ")), text)


# The three splits of LOCAL_AND_GLOBAL the reasons below are read from: c with Cc on the driver side (the probe's own rule:
# the Miller capacitor rides with its stage, docs/splitting.md), b with only Gab's output on the driver side, and a with
# both its terminals on the driver side (as when a whole block's pin is the driver side): a split that opens nothing.
_SPLITS = {
    "c": NodeSplit("c", ("gd.n", "cc.p"), ("gca.cp",), {("gd", "n"): "driver", ("cc", "p"): "driver"}),
    "b": NodeSplit("b", ("gab.n",), ("gd.cp", "cc.n"), {("gab", "n"): "driver"}),
    "a": NodeSplit("a", ("gca.n", "gab.cp"), (), {("gca", "n"): "driver", ("gab", "cp"): "driver"}),
}


@pytest.mark.parametrize(("node", "expected"), [
    ("c", "the probe splits c into driver side gd.n, cc.p and load side gca.cp; it opens loops {F, G} (the global loop); the local "
          "loop {L} (from gd back through cc: the driver stage's own feedback, which the probe keeps on the driver side) stays closed, "
          "as intended: T is the global return ratio with the local compensation in place; driven by one element (gd)"),
    ("b", "the probe splits b into driver side gab.n and load side gd.cp, cc.n; it opens loops {F, G} (the global loop); the local "
          "loop {L} (enters and leaves b on the load side, through cc, gd) stays closed: T is the global return ratio with the local "
          "compensation in place; driven by one element (gab)"),
    ("a", "the probe splits a into driver side gca.n, gab.cp and load side (none), which opens none of the group's loops: loops "
          "{F, G} (enter and leave a on the driver side, through gca, gab); loop {L} (does not pass a; the probe keeps it closed "
          "with the driver at c); T there measures no loop of the group; driven by one element (gca); it drives only "
          "high-impedance inputs (gab.cp)"),
])
def test_each_reason_says_word_for_word_what_the_split_opens_and_why_the_rest_stays_closed(node, expected):
    """The reason a user reads names the split's two sides, the loops opened, and each closed loop with the terminals that keep it closed."""
    # Reference: by construction (LOCAL_AND_GLOBAL): at c, L enters by gd.n and leaves by cc.p, both with the driver
    # (local); at b, L enters by cc.n and leaves by gd.cp, both on the load side; at a, G and F enter by gca.n and leave by
    # gab.cp, both with the driver, and L does not pass a. Wording: the module docstring of netloop.graph.split_effects.
    circuit, group, n = _setup()
    by = {c.node: c for c in apply_splits(circuit, group, _SPLITS).candidates}
    assert by[node].reason == _fill(expected, n)


@pytest.mark.parametrize("split", [*_SPLITS.values(), NodeSplit("c", ("gd.n",), ("cc.p", "gca.cp"), {("gd", "n"): "driver"})],
                         ids=["c", "b", "a", "c-cc-on-load"])
def test_a_loop_without_recorded_terminals_meets_the_node_by_the_terminals_find_loops_records(split):
    """A Loop built by hand whose steps carry no terminals (Step's defaults) gets the same fates, ways in and ways out as find_loops's own."""
    # Reference: netloop.graph.loops records each step's terminals (Step.leaves/enters) from the same signal-flow edges
    # (netloop.graph.signal_flow.element_edges) the fallback reads: an active step enters by its output pin and leaves by
    # its controlling pin, a passive one by its pins on the node; with no 0 V source joining nodes the two must agree.
    circuit, group, _ = _setup()
    bare = tuple(replace(lp, steps=tuple(replace(s, leaves=(), enters=()) for s in lp.steps)) for lp in group.loops)
    assert loop_fates(circuit, bare, split) == loop_fates(circuit, group.loops, split)


# A global loop a -gab-> b -gd-> c -gca-> a, and two local loops, each around one of its stages through a buffer and a
# resistor back to the stage's input: L1 = b -gd-> c -gx-> d -rf-> b around Gd, L2 = a -gy-> e -rg-> c -gca-> a around Gca.
BUFFERED_LOCALS = """global loop with two buffered local loops (invented)
Gab 0 b a 0 1m
Gd 0 c b 0 1m
Gca 0 a c 0 1m
Gx 0 d c 0 1m
Rf d b 10k
Gy 0 e a 0 1m
Rg e c 10k
Ra a 0 1k
Rb b 0 1k
Rc c 0 1k
Rd d 0 1k
Re e 0 1k
.end
"""


def _buffered(els: set[str]) -> str:
    return "L1" if "gx" in els else "L2" if "gy" in els else "G"


def test_a_split_that_opens_every_loop_ranks_above_one_that_keeps_the_local_loops_closed():
    """Among splits that leave no non-local loop closed, the one opening more loops ranks first; the other says its local loops stay closed."""
    # Reference: docs/census.md section 2 ("The re-ranking prefers a split that opens loops, leaves fewer non-local loops
    # closed, and opens more"). By construction (BUFFERED_LOCALS): at c, G enters by gd.n and leaves by gca.cp, L1 leaves by
    # gx.cp, L2 enters by rg.n, so gd.n and rg.n against gca.cp and gx.cp opens all three; at b only G is opened, L1
    # enters by rf.n and leaves by gd.cp on the load side and L2 does not pass b. L1 is local at d (gx.n in, rf.p out,
    # both with the driver), L2 at e; d and e open nothing and rank below; a, not looked at, comes after them.
    circuit, group, n = _setup(BUFFERED_LOCALS, _buffered)
    splits = {
        "c": NodeSplit("c", ("gd.n", "rg.n"), ("gca.cp", "gx.cp"), {("gd", "n"): "driver", ("rg", "n"): "driver"}),
        "b": NodeSplit("b", ("gab.n",), ("gd.cp", "rf.n"), {("gab", "n"): "driver"}),
        "d": NodeSplit("d", ("gx.n", "rf.p"), (), {("gx", "n"): "driver", ("rf", "p"): "driver"}),
        "e": NodeSplit("e", ("gy.n", "rg.p"), (), {("gy", "n"): "driver", ("rg", "p"): "driver"}),
    }
    out = apply_splits(circuit, group, splits)
    assert [c.node for c in out.candidates] == ["c", "b", "d", "e", "a"]
    by = {c.node: c for c in out.candidates}
    assert by["c"].opens_all and by["b"].kept_closed == tuple(sorted((n["L1"], n["L2"])))
    assert by["c"].reason == ("the probe splits c into driver side gd.n, rg.n and load side gca.cp, gx.cp, which opens all 3 loops "
                              "of the group: T is the whole return ratio and the opened circuit has no other loop of the group; "
                              "driven by one element (gd)")
    assert by["b"].reason == (f"the probe splits b into driver side gab.n and load side gd.cp, rf.n; it opens loop 1.{n['G']} (the "
                              f"global loop); the local loop 1.{n['L1']} (enters and leaves b on the load side, through rf, gd) and "
                              f"loop 1.{n['L2']} (does not pass b; the probe keeps it closed with the driver at e) stay closed: "
                              f"T is the global return ratio with the local compensation in place; driven by one element (gab)")


_LOCAL_AT_D_AND_E = {
    "a": NodeSplit("a", ("gca.n",), ("gab.cp", "gy.cp"), {("gca", "n"): "driver"}),
    "d": NodeSplit("d", ("gx.n", "rf.p"), (), {("gx", "n"): "driver", ("rf", "p"): "driver"}),
    "e": NodeSplit("e", ("gy.n", "rg.p"), (), {("gy", "n"): "driver", ("rg", "p"): "driver"}),
}


@pytest.mark.parametrize(("node", "expected"), [
    ("a", "the probe splits a into driver side gca.n and load side gab.cp, gy.cp; it opens loops {L2, G} (the local loop {L2} among "
          "them: a split at e keeps it closed with its driver); the local loop {L1} (does not pass a; the probe keeps it closed with "
          "the driver at d) stays closed; driven by one element (gca); it drives only high-impedance inputs (gab.cp, gy.cp)"),
    ("d", "the probe splits d into driver side gx.n, rf.p and load side (none), which opens none of the group's loops: loop {L1} "
          "(from gx back through rf: the driver stage's own feedback, which the probe keeps on the driver side); loops {L2, G} (do "
          "not pass d; the probe keeps loop {L2} closed with the driver at e); T there measures no loop of the group; driven by "
          "one element (gx)"),
])
def test_a_reason_claims_local_compensation_only_for_the_loops_some_split_keeps_local(node, expected):
    """A reason never calls a loop kept with a driver that no split keeps local, nor calls T global with local compensation in place when it opens a local loop."""
    # Reference: by construction (BUFFERED_LOCALS): G leaves every node by an active input (gab.cp, gd.cp, gca.cp), so no
    # split keeps it local (the module docstring's rule); L2 is local at e (gy.n in, rg.p out, both with the driver) and L1
    # at d; the split of a separates gca.n from gy.cp, so L2 runs through the probe there and its compensation is open in T.
    # (Before this was fixed, d's reason said G too was kept closed with the driver at e, and a's called L2 and G "the
    # global loop" measured "with the local compensation in place".)
    circuit, group, n = _setup(BUFFERED_LOCALS, _buffered)
    by = {c.node: c for c in apply_splits(circuit, group, _LOCAL_AT_D_AND_E).candidates}
    assert by[node].reason == _fill(expected, n)
