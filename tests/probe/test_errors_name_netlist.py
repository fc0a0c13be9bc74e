"""Probe refusals and unknown names say which netlist they concern."""

from __future__ import annotations

import pytest

from netloop.errors import ProbeError, UnknownNodeError
from netloop.netlist import parse_file
from netloop.probe import break_loop


def test_unknown_node_names_the_netlist_and_close_names(circuits):
    """An unknown node names the netlist file and suggests the closest node."""
    netlist = parse_file(circuits / "miller_buffer.cir")
    with pytest.raises(UnknownNodeError) as exc:
        break_loop(netlist, "outt")
    assert str(exc.value).startswith(f"{netlist.source}: unknown node 'outt'")
    assert "out" in exc.value.suggestions


def test_supply_refusal_names_the_netlist(circuits):
    """Breaking a supply is refused with the netlist named and the source that ties the node."""
    netlist = parse_file(circuits / "miller_buffer.cir")
    with pytest.raises(ProbeError, match=r"miller_buffer\.cir: cannot break node vdd: .*voltage source vdd"):
        break_loop(netlist, "vdd")
