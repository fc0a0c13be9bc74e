"""Decks shared by several sim tests (imported by name; pytest puts this folder on sys.path)."""

from __future__ import annotations

# KCL at n: v(n)/1k + (v(n) > 0.5 ? 2 mA : -2 mA) = 0 has no solution: v > 0.5 needs v = -2 V,
# v <= 0.5 needs v = +2 V. Nothing can make this converge.
NO_SOLUTION = """relay with no solution
b1 n 0 i = v(n) > 0.5 ? 2m : -2m
r1 n 0 1k
v1 in 0 dc 0 ac 1
r2 in n 1k
"""


# During the operating point of the first ac, ngspice evaluates sqrt(0.70 - v(c)) at v(c) a little above 0.70
# ("Error: -0.0104898 out of range for sqrt"), then finds the point by dynamic gmin stepping and finishes the sweep.
RECOVERS = """recovers
vdd vdd 0 dc 5
r1 vdd c 1k
d1 c 0 dmod
b1 f 0 v = sqrt(0.70-v(c))
r3 f 0 1k
v1 in 0 dc 0 ac 1
rin in c 1meg
.model dmod d is=1e-14
"""


def same_netloop() -> dict[str, str]:
    """The environment for a Python process of a test that must import the very netloop the test imports, whatever folder
    it starts in (as netloop.sim.spawn starts its worker), not one found from that folder or installed elsewhere."""
    import os  # noqa: PLC0415

    from netloop.sim.spawn import this_netloop  # noqa: PLC0415

    return this_netloop(os.environ)
