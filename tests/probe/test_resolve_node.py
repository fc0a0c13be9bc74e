"""resolve_node: where a hierarchical node name lives, and the pin of an instance lifted to the net it is wired to."""

from __future__ import annotations

import pytest

from netloop.errors import UnknownNodeError
from netloop.netlist import parse_text
from netloop.probe.scope import elements_of, resolve_node, walk_scopes

from .test_nested import NESTED
from .test_sides import HIER


def _where(netlist, name, lift=True):
    scope, local = resolve_node(netlist, name, frozenset(netlist.globals), lift=lift)
    return scope.path, tuple(d.name for d in scope.definitions), scope.nets, local


# Expected by hand from the X lines of NESTED (tests/probe/test_nested.py): xc1 in o1 vdd channel, xc2 in o2 vdd channel;
# inside channel: xa in mid vdd stage, xb mid out vdd stage; stage's pins are in, out, vdd; n5 and g are stage's own nodes.
# A lifted name moves up while it is a pin of its scope's definition; the scope's nets map each pin of the innermost
# definition to the net it meets at the top (ngspice's flattened name: xc2.mid for channel's own node mid).
XC2 = (("xc2",), ("channel",), (("in", "in"), ("out", "o2"), ("vdd", "vdd")))
TOP = ((), (), ())


@pytest.mark.parametrize("name, scope, local", [
    ("xc2.xb.in", XC2, "mid"),  # xb's pin in is channel's own node mid: one level up, no further
    ("xc2.xb.out", TOP, "o2"),  # xb.out is channel's pin out, which xc2 wires to o2 at the top: two levels up
    ("xc2.xa.in", TOP, "in"),
    ("xc1.xa.vdd", TOP, "vdd"),
    ("xc2.mid", XC2, "mid"),  # channel's own node: stays in xc2
    ("xc2.xa.n5", (("xc2", "xa"), ("channel", "stage"), (("in", "in"), ("out", "xc2.mid"), ("vdd", "vdd"))), "n5"),  # stage's own node
    ("xc2.xa.0", TOP, "0"),  # ground is the same net everywhere: the top
])
def test_a_pin_is_lifted_to_the_net_it_is_wired_to(name, scope, local):
    """With lift (the default) a name that is a pin of its instance resolves to the net on that pin one level up, as often as needed."""
    assert _where(parse_text(NESTED), name) == (*scope, local)


@pytest.mark.parametrize("name, scope, local", [
    ("xb.in", TOP, "mid"),  # xb mid out vdd stage: one level, pin in on the top-level net mid
    ("xa.out", TOP, "mid"),
    ("xa.g", (("xa",), ("stage",), (("in", "in"), ("out", "mid"), ("vdd", "vdd"))), "g"),
    ("xb.0", TOP, "0"),
])
def test_a_pin_one_level_down_is_lifted_to_the_top(name, scope, local):
    """One level down (HIER in tests/probe/test_sides.py: xa in mid vdd stage, xb mid out vdd stage) a pin lifts to the top-level net."""
    assert _where(parse_text(HIER), name) == (*scope, local)


def test_without_lift_a_pin_stays_inside_its_instance():
    """lift=False (how netloop.probe breaks a pin inside its instance) keeps the name where it was given, ground excepted."""
    nl = parse_text(NESTED)
    assert _where(nl, "xc2.xb.out", lift=False) == (("xc2", "xb"), ("channel", "stage"), (("in", "xc2.mid"), ("out", "o2"), ("vdd", "vdd")), "out")
    assert _where(nl, "xc2.xa.0", lift=False) == (*TOP, "0")


@pytest.mark.parametrize("text", [NESTED, HIER], ids=["nested", "one level"])
def test_lifting_keeps_the_net(text):
    """Every node name of every scope, lifted or not, is the same flattened net, and a lifted name is no pin of its scope."""
    # Reference: a pin and the net wired to it one level up are one node (SPICE subcircuit expansion), so ngspice's
    # flattened name (Scope.flat, checked against ngspice's own 'op' vectors in test_operating_point.py) is the same.
    nl = parse_text(text)
    g = frozenset(nl.globals)
    names = 0
    for scope in walk_scopes(nl, g):
        local_nodes = {n for e in elements_of(nl, scope) for n in e.nodes}
        for node in sorted(local_nodes):
            given = ".".join((*scope.path, node))
            kept, kept_local = resolve_node(nl, given, g, lift=False)
            lifted, lifted_local = resolve_node(nl, given, g)
            assert lifted.flat(lifted_local, g) == kept.flat(kept_local, g) == scope.flat(node, g)
            assert not lifted.definitions or lifted_local not in lifted.definitions[-1].pins
            if lifted.path:  # the lifted scope is the one walk_scopes builds for that path (its nets included)
                assert lifted == next(s for s in walk_scopes(nl, g) if s.path == lifted.path)
            names += 1
    assert names >= 10



DOTTED = HIER.replace("Rin in g 10k\n", "Rin in a.b 10k\nRab a.b g 1k\n") + "Rdot mid n.1 1k\nRn n.1 0 1k\n"


@pytest.mark.parametrize("name, scope, local", [
    ("n.1", TOP, "n.1"),  # a top-level node whose own name has a dot (SPICE allows it)
    ("xa.a.b", (("xa",), ("stage",), (("in", "in"), ("out", "mid"), ("vdd", "vdd"))), "a.b"),  # the same inside xa: a is no instance
])
def test_a_node_name_with_a_dot_is_found_where_it_is_written(name, scope, local):
    """A node whose own name contains a dot resolves to that node, at the top or inside an instance, lifted or not."""
    nl = parse_text(DOTTED)
    assert _where(nl, name) == _where(nl, name, lift=False) == (*scope, local)


@pytest.mark.parametrize("name", ["xq.n5", "xa.zz", "rdot.x", "xa.rin.x", "zz"])
def test_an_unknown_name_is_refused_as_an_unknown_node(name):
    """An unknown instance on the path, an unknown node inside a known one, an element that is no instance, or an unknown top node: UnknownNodeError."""
    with pytest.raises(UnknownNodeError) as info:
        resolve_node(parse_text(DOTTED), name, frozenset())
    assert str(info.value).startswith(f"unknown node {name!r}")


def test_a_pin_whose_name_has_a_dot_is_lifted_only_when_asked():
    """A pin named with a dot (o.1) is lifted to the net on it (y) by default and stays inside the instance without lift."""
    # By hand: X1 in y buf wires buf's pin o.1 to the top-level net y.
    nl = parse_text("dotted pin (invented)\n.subckt buf a o.1\nE1 o.1 0 a 0 1\n.ends buf\nV1 in 0 dc 1\nX1 in y buf\nR1 y 0 1k\n")
    assert _where(nl, "x1.o.1") == (*TOP, "y")
    assert _where(nl, "x1.o.1", lift=False) == (("x1",), ("buf",), (("a", "in"), ("o.1", "y")), "o.1")


@pytest.mark.parametrize("name, close", [("xq.n5", "xa.n5"), ("mdd", "mid")])
def test_an_unknown_name_suggests_the_closest_nodes(name, close):
    """The refusal of an unknown name suggests the closest flattened node names (an unknown instance on the path, an unknown top node)."""
    with pytest.raises(UnknownNodeError, match=rf"did you mean .*'{close}'"):
        resolve_node(parse_text(DOTTED), name, frozenset())
