"""Loop discovery on synthetic netlists whose loops are known by construction."""

from __future__ import annotations

import math
from itertools import permutations

import networkx as nx
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from netloop.graph import flatten
from netloop.graph.loops import find_loops
from netloop.netlist import parse_text


def _stage(src: str, dst: str, tag: str) -> str:
    """A transconductance stage: current gm*v(src) into dst, which has 1k to ground: signal flows src -> dst only."""
    return f"G{tag} 0 {dst} {src} 0 1m\n"


def _deck(edges, extra: str = "") -> str:
    text = "synthetic loops (invented)\n"
    for k, (a, b) in enumerate(edges):
        text += _stage(a, b, f"_{a}_{b}_{k}")
    for n in sorted({n for e in edges for n in e}):
        text += f"R_{n} {n} 0 1k\n"
    return text + extra + ".end\n"


def _found(text: str, **kw):
    return find_loops(flatten(parse_text(text)), **kw)


def _cycles(group) -> set[frozenset]:
    return {frozenset(lp.nodes) for lp in group.loops}


def test_nested_loops_share_a_group_and_the_common_nodes_open_both():
    """An outer loop a->b->c->a with an inner loop b->c->b nested in it: one group, two loops, b and c open both."""
    # Reference: by construction, the loops of this netlist are exactly {a,b,c} and {b,c}.
    found = _found(_deck([("a", "b"), ("b", "c"), ("c", "a"), ("c", "b")]))
    (group,) = found.groups
    assert _cycles(group) == {frozenset("abc"), frozenset("bc")}
    assert {c.node for c in group.candidates if c.opens_all} == {"b", "c"}
    a = next(c for c in group.candidates if c.node == "a")
    assert a.left_closed and not a.opens_all
    assert group.best.node in ("b", "c")


def test_independent_amplifiers_are_separate_groups():
    """Three loops that share no node and cannot reach one another are three groups, each with its own best break."""
    # Reference: by construction, three disjoint two-stage loops.
    edges = [(f"x{k}", f"y{k}") for k in range(3)] + [(f"y{k}", f"x{k}") for k in range(3)]
    found = _found(_deck(edges))
    assert [set(g.nodes) for g in found.groups] == [{"x0", "y0"}, {"x1", "y1"}, {"x2", "y2"}]
    assert all(len(g.loops) == 1 and g.best.opens_all for g in found.groups)


def test_local_loop_inside_a_global_loop_is_listed_and_named_as_left_closed():
    """A local loop around one stage of a global loop: a node of the global loop only leaves the local loop closed."""
    # Reference: by construction, global loop a->b->c->d->a and local loop c->e->c around the stage at c.
    found = _found(_deck([("a", "b"), ("b", "c"), ("c", "d"), ("d", "a"), ("c", "e"), ("e", "c")]))
    (group,) = found.groups
    assert _cycles(group) == {frozenset("abcd"), frozenset("ce")}
    assert group.best.node == "c" and group.best.opens_all
    a = next(c for c in group.candidates if c.node == "a")
    closed = [group.loops[k - 1] for k in a.left_closed]
    assert [set(lp.nodes) for lp in closed] == [{"c", "e"}]


# Two two-stage rings, a <-> b and c <-> d, whose first nodes a resistor joins, and a third ring e <-> f between them in
# circuit order (invented): the first two share no node, but a signal goes from one to the other through Rac and back
# through Rac, so they are one strongly connected part.
RINGS_JOINED_BY_A_RESISTOR = _deck([("a", "b"), ("b", "a"), ("e", "f"), ("f", "e"), ("c", "d"), ("d", "c")], "Rac a c 1k\n")


def test_loops_sharing_no_node_are_separate_groups_even_when_a_passive_network_joins_them():
    """Two rings joined only by a resistor are two loop groups, each broken on its own, and one note names both groups."""
    # Reference: by construction (RINGS_JOINED_BY_A_RESISTOR): the only elementary cycles through Rac cross it twice, so the
    # loops are the rings; a break of one ring leaves the other closed whatever Rac does; e <-> f reaches neither.
    from netloop.cli.loops_cmd import format_census
    from netloop.jobs.discover import take_census

    found = _found(RINGS_JOINED_BY_A_RESISTOR)
    assert [sorted(g.nodes) for g in found.groups] == [["a", "b"], ["e", "f"], ["c", "d"]]
    assert [len(g.loops) for g in found.groups] == [1, 1, 1] and all(g.best.opens_all for g in found.groups)
    note = ("loop groups 1, 3 share no node, but reach one another through a passive network (a signal path joining them crosses "
            "it twice): each is listed, broken and measured on its own, with the others closed")
    assert found.notes == (note,)
    assert f"note: {note}" in format_census(take_census(RINGS_JOINED_BY_A_RESISTOR, sweep=False)).splitlines()


def test_loops_through_subcircuit_pins_carry_hierarchical_names():
    """A loop closed through three instances of a two-stage block passes their pins and their internal nodes by hierarchical name."""
    # Reference: by construction, x1 (a->b), x2 (b->c), x3 (c->a), each through its own internal node mid.
    text = """hierarchical loop (invented)
.subckt blk in out
G1 0 mid in 0 1m
R1 mid 0 1k
G2 0 out mid 0 1m
R2 out 0 1k
.ends blk
X1 a b blk
X2 b c blk
X3 c a blk
.end
"""
    (group,) = _found(text).groups
    (loop,) = group.loops
    assert set(loop.nodes) == {"a", "x1.mid", "b", "x2.mid", "c", "x3.mid"}
    assert set(loop.elements) == {"x1.g1", "x1.g2", "x2.g1", "x2.g2", "x3.g1", "x3.g2"}
    assert group.best.node in ("a", "b", "c")  # top-level pins before nodes inside an instance


def test_large_rc_mesh_adds_no_loops_and_its_separators_are_break_points():
    """A loop through a 2-section RC ladder with a 20x20 RC mesh hanging on it: one loop, ladder nodes open it, mesh nodes do not."""
    # Reference: by construction, the mesh hangs on one node (it closes no loop); the ladder is the only way back.
    text = _deck([("a", "b")]) .replace(".end\n", "")
    text += "Rl1 b l1 1k\nCl1 l1 0 1p\nRl2 l1 l2 1k\nCl2 l2 0 1p\n" + _stage("l2", "a", "back")
    for r in range(20):
        for c in range(20):
            if c < 19:
                text += f"Rh{r}_{c} g{r}_{c} g{r}_{c + 1} 1\n"
            if r < 19:
                text += f"Rv{r}_{c} g{r}_{c} g{r + 1}_{c} 1\n"
    text += "Rtap l1 g0_0 1\n.end\n"
    (group,) = _found(text).groups
    (loop,) = group.loops
    assert loop.describe() == "b -rl1-> l1 -rl2-> l2 -gback(cp>n)-> a -g_a_b_0(cp>n)-> b"  # starts at the first node in circuit order
    assert set(loop.opened_by) == {"a", "b", "l1", "l2"}


def test_mesh_between_two_ports_opens_only_at_its_ends_when_it_has_parallel_paths():
    """A loop returning through a 2x2 resistor square (two parallel paths): only the square's two ends open it."""
    # Reference: by construction, every inner node of the square has a parallel path around it.
    text = _deck([("a", "p")]).replace(".end\n", "")
    text += "R1 p u 1k\nR2 u q 1k\nR3 p w 1k\nR4 w q 1k\n" + _stage("q", "a", "back") + ".end\n"
    (group,) = _found(text).groups
    assert set(group.loops[0].opened_by) == {"a", "p", "q"}


def _complete(n: int) -> str:
    return _deck([(f"n{i}", f"n{j}") for i, j in permutations(range(n), 2)])


def test_loop_count_of_a_complete_graph_and_the_cap():
    """Every stage feeding every other among 5 nodes gives sum C(5,k)(k-1)! loops; a lower cap stops there and says so."""
    # Reference: the number of elementary cycles of length k in the complete digraph on n vertices is
    # C(n,k)(k-1)! (combinatorics, from memory): for n = 5 that is 10+20+30+24 = 84.
    expected = sum(math.comb(5, k) * math.factorial(k - 1) for k in range(2, 6))
    (group,) = _found(_complete(5)).groups
    assert len(group.loops) == expected and not group.capped
    bounded = _found(_complete(5), length_bound=3)
    assert len(bounded.groups[0].loops) == math.comb(5, 2) + 2 * math.comb(5, 3)
    capped = _found(_complete(5), max_loops=10)
    assert len(capped.groups[0].loops) == 10 and capped.groups[0].capped
    assert any("more than 10 loops" in note for note in capped.notes)
    assert "capped" in capped.groups[0].best.reason or not capped.groups[0].best.opens_all


@settings(max_examples=25, deadline=None, derandomize=True)
@given(st.lists(st.tuples(st.integers(0, 6), st.integers(0, 6)), min_size=1, max_size=14))
def test_random_stage_graphs_match_networkx_cycles(pairs):
    """For random one-way stage graphs, the loops found are exactly networkx's elementary cycles of that graph, grouped by shared nodes."""
    # Reference: networkx 3 simple_cycles on the digraph the netlist was built from (by construction each G stage is one edge).
    edges = sorted({(f"n{a}", f"n{b}") for a, b in pairs if a != b})
    if not edges:
        return
    found = _found(_deck(edges))
    got = sorted(sorted(lp.nodes) for g in found.groups for lp in g.loops)
    want = sorted(sorted(c) for c in nx.simple_cycles(nx.DiGraph(edges)))
    assert got == want
    for g in found.groups:
        assert set(g.nodes) == {n for lp in g.loops for n in lp.nodes}
        for c in g.candidates:
            assert c.opens_all == all(c.node in lp.nodes for lp in g.loops)


def test_bounds_below_two_vertices_or_one_loop_are_refused_and_the_least_ones_accepted():
    """A length bound below 2 or a cap below 1 is refused with one message; a bound of 2 lists the two-node loops, a cap of 1 one loop."""
    # Reference: by construction (a loop has at least two nodes); the complete digraph on 3 vertices has C(3,2) = 3
    # two-vertex cycles and 5 cycles in all (combinatorics, from memory).
    flat = flatten(parse_text(_complete(3)))
    for bounds in ({"length_bound": 1}, {"max_loops": 0}):
        with pytest.raises(ValueError) as err:
            find_loops(flat, **bounds)
        assert str(err.value) == "length_bound must be at least 2 and max_loops at least 1"
    (pairs,) = find_loops(flat, length_bound=2).groups
    assert sorted(sorted(lp.nodes) for lp in pairs.loops) == [["n0", "n1"], ["n0", "n2"], ["n1", "n2"]] and not pairs.capped
    (one,) = find_loops(flat, max_loops=1).groups
    assert len(one.loops) == 1 and one.capped


def test_the_cycle_search_sees_only_parts_that_can_loop_and_reads_one_cycle_past_the_cap(monkeypatch):
    """find_loops asks for cycles only in strongly connected parts of two vertices or more, and reads one cycle past the cap, no more."""
    # Reference: a strongly connected component of one vertex and no self-edge has no cycle (Tarjan, "Depth-first search
    # and linear graph algorithms", 1972); one item past a limit is all a capped listing needs to know it was capped
    # (common practice); the complete digraph on 5 vertices has 84 cycles, so a cap of 10 is reached.
    import netloop.graph.loops as loops_module

    searched: list[tuple[list, list]] = []
    real = loops_module.bounded_cycles

    def spy(graph, vertices, length_bound, skip=None):
        seen: list = []
        searched.append((list(vertices), seen))
        for cycle in real(graph, vertices, length_bound, skip=skip):
            seen.append(cycle)
            yield cycle

    monkeypatch.setattr(loops_module, "bounded_cycles", spy)
    text = _complete(5).replace(".end\n", _stage("in", "n0", "in") + _stage("n4", "out", "out") + "R_in in 0 1k\nR_out out 0 1k\n.end\n")
    (group,) = _found(text, max_loops=10).groups
    assert group.capped and len(group.loops) == 10
    assert [(sorted(vertices), len(seen)) for vertices, seen in searched] == [([f"n{k}" for k in range(5)], 11)]


def test_a_long_loop_is_described_shortened_on_request_and_listed_whole_in_json():
    """A ring of 60 stages: describe() gives every step; describe(16) the first and last 8 steps around the count of the
    44 others, starting and ending where the whole description does; `netloop loops` text counts it in one line, its JSON is whole."""
    from netloop.cli.loops_cmd import census_document, format_census
    from netloop.jobs.discover import take_census

    nodes = [f"n{i}" for i in range(60)]
    found = _found(_deck(list(zip(nodes, nodes[1:] + nodes[:1]))), length_bound=80)
    (loop,) = found.groups[0].loops
    whole, short = loop.describe(), loop.describe(16)
    assert whole.count("->") == 60
    assert short.count("->") == 16 and "... 44 more steps ..." in short
    assert short.split(" ... ")[0] == whole[: len(short.split(" ... ")[0])]  # the same first steps
    assert whole.endswith(short.split(" ... ")[-1].split(" ", 1)[1])  # the same last steps
    census = take_census(_deck(list(zip(nodes, nodes[1:] + nodes[:1]))), sweep=False, length_bound=80)
    text = format_census(census)
    assert "loop 1 (n1): 1 loop, 60 nodes; break at n1" in text and "n59" not in text and len(text) < 1000
    assert census_document(census)["groups"][0]["loops"][0]["path"] == whole


def test_a_loops_active_steps_count_the_stages_that_amplify():
    """Loop.active_steps counts the steps through controlled sources and transistors, not through passive parts: a ring
    of three transconductors has three; closed by a resistor instead of the third, two (by construction)."""
    from netloop.graph import find_loops, flatten
    from netloop.netlist import parse_text

    stages = "Ra a 0 1k\nCa a 0 1n\nRb b 0 1k\nCb b 0 1n\nRc c 0 1k\nCc c 0 1n\n"
    three = "ring\nG1 0 b a 0 2m\nG2 0 c b 0 2m\nG3 a 0 c 0 2m\n" + stages + ".end\n"
    two = "ring\nG1 0 b a 0 2m\nG2 0 c b 0 2m\nRf c a 10k\n" + stages + ".end\n"
    counts = {}
    for name, text in (("three", three), ("two", two)):
        loops = [loop for group in find_loops(flatten(parse_text(text))).groups for loop in group.loops]
        counts[name] = sorted(loop.active_steps for loop in loops if len(loop.steps) == 3)
    assert counts == {"three": [3], "two": [2]}


def test_a_loop_closing_through_a_transformer_crosses_its_coupling():
    """Coupled inductors pass signal both ways between their windings (circuit theory: K1 L1 L2 couples the two
    inductors' nodes): a loop driven into the primary and taken back from the secondary is found, stepping across k1."""
    text = ("transformer-coupled loop (invented)\nG1 0 p in 0 1m\nR1 p 0 1k\nL1 p 0 1m\nL2 s 0 1m\nK1 L1 L2 0.9\nRs s 0 1k\n"
            "E1 in 0 s 0 -1\n.end\n")
    (group,) = find_loops(flatten(parse_text(text))).groups
    assert [lp.describe() for lp in group.loops] == ["p -k1-> s -e1(cp>p)-> in -g1(cp>n)-> p"]
    assert set(group.nodes) == {"p", "s", "in"}


def test_the_nodes_that_open_a_loop_are_listed_in_loop_order_on_every_bundled_circuit(circuits):
    """Loop.opened_by lists the nodes whose break opens the loop in the order the loop passes them (first pass, for a
    loop that visits a node twice, as the fully differential benches' do): on every circuit bundled, nested blocks and
    sky130 benches included, not in the order of their names (circuits/benches/fd_miller_pair.cir: xamp.zn before outn);
    a node joined to a loop node by a 0 V source is listed where the loop passes through it."""
    from netloop.netlist import parse_file

    seen = 0
    for path in sorted(circuits.rglob("*.cir")):
        if "expert" in path.parts or "blocks" in path.parts:
            continue  # the expert decks and the blocks of circuits/hier are not netlists of their own
        for group in find_loops(flatten(parse_file(path))).groups:
            for lp in group.loops:
                wanted = set(lp.opened_by)
                # the loop passes each loop node where the step before enters it and leaves it where its own step leaves:
                # real nodes of their own when a 0 V source joins them (circuits/testbench/ldo_nmos_switch.cir: in at vpass,
                # the pass device's source, out at vout, past the 0 V sense source), else the loop node itself
                passed = [n for k, step in enumerate(lp.steps)
                          for n in (*(node for _, _, node in lp.steps[k - 1].enters), step.source, *(node for _, _, node in step.leaves))]
                assert list(lp.opened_by) == list(dict.fromkeys(n for n in passed if n in wanted)), (path.name, lp.describe())
                seen += 1
    assert seen > 100
