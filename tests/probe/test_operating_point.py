"""The probe adds only zero-DC sources: ngspice's operating point is unchanged at every node."""

from __future__ import annotations

import pytest

from netloop.errors import ProbeError
from netloop.netlist import parse_file, parse_text, write_netlist
from netloop.probe import break_loop

from .test_sides import HIER


def assert_same_op(before, after):
    assert before, "no operating point"
    for node, v in before.items():
        assert node in after, node
        assert abs(after[node] - v) <= max(1e-9 * abs(v), 1e-9), (node, v, after[node])


@pytest.mark.ngspice
def test_miller_buffer_op_unchanged(simulator, circuits):
    """Every node voltage of the Miller buffer (ngspice 'op') is the same with the probe in place; side a sits at the node's voltage."""
    nl = parse_file(circuits / "miller_buffer.cir")
    p = break_loop(nl, "out")
    before = simulator.operating_point(write_netlist(nl))  # ngspice's own op
    after = simulator.operating_point(write_netlist(p.netlist))
    assert_same_op(before, after)
    assert abs(after[p.side_a] - before["out"]) <= 1e-9


@pytest.mark.ngspice
def test_hierarchical_op_unchanged(simulator):
    """A break inside xa (not xb) leaves every node of both instances at its ngspice 'op' value, hierarchical names included."""
    nl = parse_text(HIER)
    before = simulator.operating_point(write_netlist(nl))
    assert "xa.n5" in before and "xb.n5" in before  # ngspice 39 names inner nodes instance.node
    for at, driver in (("xa.n5", None), ("xb.n5", None), ("xa.g", "rf")):
        p = break_loop(nl, at, driver=driver)
        after = simulator.operating_point(write_netlist(p.netlist))
        assert_same_op(before, after)
        assert p.side_a in after and p.side_b in after  # the probe's node names are ngspice's own


@pytest.mark.ngspice
def test_every_breakable_node_keeps_op(simulator, circuits):
    """For every node of the Miller buffer that can be broken, the operating point stays the same (ngspice 'op')."""
    nl = parse_file(circuits / "miller_buffer.cir")
    before = simulator.operating_point(write_netlist(nl))
    broken = 0
    for node in sorted(before):
        try:
            p = break_loop(nl, node)
        except ProbeError:
            continue
        assert_same_op(before, simulator.operating_point(write_netlist(p.netlist)))
        broken += 1
    assert broken >= 4
