"""A node whose only connection in its scope is one instance's pin is broken inside that instance, where its loop closes."""

from __future__ import annotations

import numpy as np
import pytest

from netloop.errors import ProbeError
from netloop.jobs.measure import measure
from netloop.netlist import parse_text
from netloop.probe import break_loop

# Invented: the demo Miller buffer's devices, once at the top and once inside a subcircuit whose output pin
# reaches nothing else at the top (a block whose feedback is closed inside it).
BODY = """Ibias vdd nbias dc 20u
M8 nbias nbias 0 0 nch w=10u l=1u
M5 tail nbias 0 0 nch w=20u l=1u
M1 d1 out tail 0 nch w=20u l=1u
M2 o1 inp tail 0 nch w=20u l=1u
M3 d1 d1 vdd vdd pch w=20u l=1u
M4 o1 d1 vdd vdd pch w=20u l=1u
M6 out o1 vdd vdd pch w=80u l=1u
M7 out nbias 0 0 nch w=50u l=1u
Rz o1 cz 1.5k
Cc cz out 1.2p
CL out 0 2p
"""
MODELS = """.model nch nmos level=1 vto=0.6 kp=110u lambda=0.05 gamma=0.4 phi=0.7 cgso=0.2n cgdo=0.2n cj=0.3m
.model pch pmos level=1 vto=-0.7 kp=40u lambda=0.06 gamma=0.5 phi=0.7 cgso=0.2n cgdo=0.2n cj=0.5m
"""
SUPPLIES = "Vdd vdd 0 dc 3.3\nVin inp 0 dc 1.65 ac 1\n"
FLAT = "flat buffer (invented models)\n" + MODELS + SUPPLIES + BODY + ".end\n"
WRAPPED = ("wrapped buffer (invented models)\n" + MODELS + ".subckt buf inp out vdd\n" + BODY + ".ends\n" + SUPPLIES
           + "X1 inp y vdd buf\n.end\n")


@pytest.mark.parametrize("at", ["y", "x1.out"])
def test_pin_net_with_one_connection_is_broken_inside_the_instance(at):
    """Named by its top-level net or by its name inside, the node is split inside x1 with the flat circuit's sides."""
    flat = break_loop(parse_text(FLAT), "out")
    inside = break_loop(parse_text(WRAPPED), at)
    assert inside.driver_terminals == tuple(f"x1.{t}" for t in flat.driver_terminals)
    assert inside.load_terminals == tuple(f"x1.{t}" for t in flat.load_terminals)
    assert inside.side_a == "x1.out_drive" and inside.side_b == "y"


def test_a_pin_net_of_an_instance_with_nothing_inside_on_it_is_still_refused():
    """When the pin's net inside the instance reaches nothing either, there is no loop there: the refusal stands."""
    text = "open pin (invented)\n.subckt blk a b\nR1 a 0 1k\n.ends\nV1 in 0 dc 0 ac 1\nX1 in y blk\n.end\n"
    with pytest.raises(ProbeError, match="one connection"):
        break_loop(parse_text(text), "y")


@pytest.mark.ngspice
def test_loop_inside_an_instance_measures_as_the_flat_circuit():
    """The wrapped buffer broken at its output pin's net gives the flat buffer's return ratio (same devices, same
    operating point) to ngspice's precision, so its phase margin too."""
    flat = measure(FLAT, "out", processes=1)
    wrapped = measure(WRAPPED, "y", processes=1)
    np.testing.assert_allclose(wrapped.analysis.t, flat.analysis.t, rtol=1e-6)
    assert wrapped.analysis.margins.phase_margin_deg == pytest.approx(flat.analysis.margins.phase_margin_deg, abs=1e-6)
