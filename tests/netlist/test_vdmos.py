"""The VDMOS element: 3 nodes, or 5 with the thermal nodes (issue 15.13), read as ngspice reads it."""

from __future__ import annotations

import pytest

from netloop.errors import NetlistSyntaxError
from netloop.netlist import parse_text

# an invented bench with an invented model card (for demonstration only); ngspice manual, VDMOS:
# "Mxxx nd ng ns [tj tc] mname [thermal]" (tj, tc the junction and case temperature nodes)
BENCH = """vdmos stage with its thermal nodes (invented bench)
vdd vdd 0 dc 12
vg g 0 dc 3
rd vdd out 100
m1 out g 0 tj tc pwr thermal
m2 out g 0 pwr
rth tc 0 1
.model pwr vdmos(vto=2 kp=2 rthjc=1 cthj=1m)
.end
"""


@pytest.mark.ngspice
def test_five_node_vdmos_has_its_thermal_nodes_and_its_model(tmp_path, op_of):
    """m1's nodes are d g s tj tc and its model pwr (no 'undefined model tc'), m2's d g s; ngspice's own op has the
    nodes tj and tc with a junction above the case (reference: ngspice op, print all)."""
    op = op_of(BENCH, tmp_path)
    assert op["tj"] > op["tc"] > 0.0
    nl = parse_text(BENCH)
    m1, m2 = nl.element("m1"), nl.element("m2")
    assert (m1.nodes, m1.pins, m1.model) == (("out", "g", "0", "tj", "tc"), ("d", "g", "s", "tj", "tc"), "pwr")
    assert (m2.nodes, m2.pins, m2.model) == (("out", "g", "0"), ("d", "g", "s"), "pwr")
    assert nl.warnings == ()


def test_a_vdmos_model_defined_after_its_card_and_a_four_token_card_of_another_model():
    """The model may follow the card (ngspice reads the whole deck first); a 4-token M card whose model is no vdmos
    model is still refused as a MOSFET missing its bulk node (ngspice manual, MOSFETs: Mxxx nd ng ns nb mname)."""
    nl = parse_text("t\nm1 d g s tj tc pwr\n.model pwr vdmos\n")
    assert nl.element("m1").nodes == ("d", "g", "s", "tj", "tc")
    with pytest.raises(NetlistSyntaxError, match="M1: expected 4 nodes and a model"):
        parse_text("t\nM1 d g s nch\n.model nch nmos\n")


def test_a_three_node_vdmos_card_with_parameters():
    """`M3 d g s PWR m=2` is a three-node VDMOS with a parameter (ngspice manual, VDMOS: "Mxxx nd ng ns [tj tc] mname
    [thermal]"; m= is the instance multiplier), its model named in any case, before or after the card."""
    for text in ("t\n.model pwr vdmos\nM3 d g s PWR m=2\n", "t\nM3 d g s PWR m=2\n.model pwr vdmos\n"):
        m3 = parse_text(text).element("m3")
        assert (m3.nodes, m3.pins, m3.model) == (("d", "g", "s"), ("d", "g", "s"), "pwr")
