"""Which values are knobs, how each is named, and where its value is written (parsed netlists, no simulator)."""

from __future__ import annotations

from netloop.jobs.sensitivity import find_knobs
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
    nonlinear E/G forms and independent sources are not."""
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
