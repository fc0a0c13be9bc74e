"""ngspice's own pole analysis as node_poles reads it, against the closed form of a tank circuit."""

from __future__ import annotations

import math

import numpy as np
import pytest

from netloop.sim.pole_zero import node_poles

# a parallel RLC tank at node n, fed from a DC source through r0 (the source is a short for small signals: r0 || r1)
TANK = "tank\nv1 a 0 dc 1\nr0 a n 2k\nr1 n 0 2k\nl1 n 0 1m\nc1 n 0 1n\n.end\n"


@pytest.mark.ngspice
def test_the_poles_of_a_tank_are_its_closed_form():
    """The impedance at n has the tank's natural frequencies: s^2 + s/(RC) + 1/(LC) = 0 with R = r0 || r1 = 1 kOhm (circuit
    theory), s = -1/(2RC) +- j sqrt(1/(LC) - 1/(2RC)^2), to the 12 digits ngspice prints."""
    r, l, c = 1e3, 1e-3, 1e-9
    real = -1 / (2 * r * c)
    imag = math.sqrt(1 / (l * c) - real**2)
    poles = node_poles(TANK, "n")
    assert poles is not None and poles.size == 2
    np.testing.assert_allclose(np.sort_complex(poles), [complex(real, -imag), complex(real, imag)], rtol=1e-9)


@pytest.mark.ngspice
def test_a_circuit_without_natural_frequencies_gives_none():
    """Resistors alone have no pole: ngspice lists none, and node_poles says so (None: no cross-check, never 'stable')."""
    assert node_poles("divider\nv1 a 0 dc 1\nr0 a n 2k\nr1 n 0 2k\n.end\n", "n") is None
