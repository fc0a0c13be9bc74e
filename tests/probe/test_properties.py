"""Property: on random transistor rings, a break moves only the driver terminals and keeps ngspice's operating point."""

from __future__ import annotations

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from netloop.netlist import parse_text, write_netlist
from netloop.probe import break_loop

from .test_operating_point import assert_same_op


def ring(stages: int, loads_k: list[int], caps_f: list[int], follower: bool) -> str:
    """An invented ring of common-source stages (level-1 INVENTED model), each with a resistor load and a capacitor."""
    lines = ["random ring", ".model nch nmos level=1 vto=0.5 kp=20u lambda=0.05", "Vdd vdd 0 dc 3.3", "Vb bias 0 dc 1 ac 1"]
    for k in range(stages):
        nxt = (k + 1) % stages
        lines.append(f"M{k} n{nxt} n{k} 0 0 nch w=10u l=1u")
        lines.append(f"R{k} vdd n{nxt} {loads_k[k]}k")
        lines.append(f"C{k} n{nxt} 0 {caps_f[k]}f")
        lines.append(f"Rb{k} bias n{k} 1meg")
    if follower:
        lines.append("Mf vdd n0 fo 0 nch w=10u l=1u")
        lines.append("Rfo fo 0 50k")
    return "\n".join(lines) + "\n"


@pytest.mark.ngspice
@settings(max_examples=12, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    stages=st.integers(3, 5),
    loads=st.lists(st.integers(5, 100), min_size=5, max_size=5),
    caps=st.lists(st.integers(1, 500), min_size=5, max_size=5),
    follower=st.booleans(),
    at=st.integers(0, 4),
)
def test_random_rings_keep_connections_and_op(simulator, stages, loads, caps, follower, at):
    """Every element except the moved driver terminals is unchanged, and every ngspice 'op' node voltage stays within 1e-9."""
    nl = parse_text(ring(stages, loads, caps, follower))
    node = f"n{at % stages}"
    p = break_loop(nl, node)
    assert p.driver_terminals == (f"m{(at % stages - 1) % stages}.d",)
    old = {e.key: e for e in nl.elements}
    new = {e.key: e for e in p.netlist.elements}
    assert set(new) - set(old) == {"vnl_series", "inl_shunt"}
    for key, e in old.items():
        if key == "vb":
            assert new[key].tokens[:4] == e.tokens[:4] and "ac 0" in new[key].card()
        elif f"{key}.d" in p.driver_terminals:
            assert new[key].nodes == (f"{node}_drive", *e.nodes[1:])
        else:
            assert new[key] == e
    assert_same_op(simulator.operating_point(write_netlist(nl)), simulator.operating_point(write_netlist(p.netlist)))  # ngspice's own op
