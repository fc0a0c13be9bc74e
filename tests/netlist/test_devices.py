"""Device-wrapper subcircuits: which count as one device, and the role of each pin."""

from __future__ import annotations

import pytest

from netloop.netlist import device_pin_roles, device_primitive, is_device_subcircuit, parse_text

DEFS = """defs
.subckt nwrap 1 2 3 4 params: w=1
.param wl=2
Mx 1 2 3 4 nmod w={w}
.model nmod nmos
.ends
.subckt qwrap c b e
Q1 c b e qmod
.model qmod npn
.ends
.subckt dwrap a k
D1 a k dmod area=2
.ends
.subckt twostage a b
M1 a b 0 0 nmod
M2 b a 0 0 nmod
.ends
.subckt internal d g s
M1 d g x x nmod
R1 x s 1
.ends
.subckt resistor a b
R1 a b 1k
.ends
"""


def test_wrappers_and_their_pin_roles():
    """A body of one M, Q or D card plus directives is a device; its pins take the device's roles, whatever they are named."""
    nl = parse_text(DEFS)
    assert is_device_subcircuit(nl.subcircuit("nwrap"))
    assert device_pin_roles(nl.subcircuit("nwrap")) == ("d", "g", "s", "b")
    assert device_primitive(nl.subcircuit("nwrap")).kind == "M"
    assert device_pin_roles(nl.subcircuit("qwrap")) == ("c", "b", "e")
    assert device_pin_roles(nl.subcircuit("dwrap")) == ("p", "n")


@pytest.mark.parametrize("name", ["twostage", "internal", "resistor"])
def test_real_circuits_are_not_wrappers(name):
    """Two devices, a device on an internal node, or a passive-only body is a circuit, not a device wrapper."""
    sub = parse_text(DEFS).subcircuit(name)
    assert not is_device_subcircuit(sub)
    with pytest.raises(ValueError):
        device_pin_roles(sub)


def test_a_pin_the_device_does_not_use_keeps_its_name():
    """A wrapper pin that no terminal of its device uses (a spare well tie, say) keeps its own name as its role; a circuit
    asked for roles is refused by name (device_pin_roles' documented contract)."""
    nl = parse_text("t\n.subckt nw d g s b well\nM1 d g s b nmod\n.model nmod nmos\n.ends\n" + DEFS.split("\n", 1)[1])
    assert device_pin_roles(nl.subcircuit("nw")) == ("d", "g", "s", "b", "well")
    with pytest.raises(ValueError, match="^subcircuit resistor is not a device wrapper$"):
        device_pin_roles(nl.subcircuit("resistor"))
