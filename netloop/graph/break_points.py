"""Rank the nodes of a loop group as break points, each with the reason in one sentence.

Order (best first):
1. nodes on every loop of the group (a break there can open them all; whether it does depends
   on how the probe splits the node's terminals, which netloop.graph.split_effects applies
   afterwards); then the nodes on the most loops, each saying which loops do not pass it;
2. among equals, a node driven by a single element (counting active drivers, and passive ones only
   where no active output sits on the node, as a divider tap);
3. then a node whose loads inside the group are only high-impedance inputs (gates, bases,
   controlling inputs), and whose one driver is a low-impedance output (a follower's source or
   emitter, a controlled voltage source): common practice, where the designer's intuition puts
   the break, although the probe is exact at any node;
4. then the shallower hierarchical name, then circuit order.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from netloop.graph.loop_records import BreakCandidate, Loop
from netloop.graph.signal_flow import CONTROL_PINS, cascode_diodes, element_edges

if TYPE_CHECKING:
    from netloop.graph.flat import FlatCircuit

__all__ = ["rank_candidates", "touching"]


def _numbers(nums: tuple[int, ...]) -> str:
    return ", ".join(str(n) for n in nums)


def touching(circuit: FlatCircuit, nodes: set[str] | frozenset[str]) -> dict[str, list[int]]:
    """For each of ``nodes``, the positions of the elements with a terminal on it (one pass over the circuit)."""
    out: dict[str, list[int]] = {n: [] for n in nodes}
    for i, ns in enumerate(circuit.element_nodes):
        for n in ns:
            row = out.get(n)
            if row is not None and (not row or row[-1] != i):
                row.append(i)
    return out


def _voltage_form(tokens: tuple[str, ...]) -> bool:
    """Whether a B card's expression (its tokens after the name) sets a voltage (``v=``, a controlled voltage source) rather than a current (``i=``)."""
    return "".join(tokens[2:]).lower().startswith("v=")  # two nodes, then the expression


def _roles(circuit: FlatCircuit, node: str, group: frozenset[str], signal: frozenset[str], elements: list[int],
           cascoded: frozenset[str] = frozenset()):
    """(drivers, loads, single, high_z, low_z) of a node, counting only edges inside the group (``cascoded``: the
    transistors diode-connected through a cascode, netloop.graph.signal_flow.cascode_diodes)."""
    active_in: dict[str, str] = {}
    passive_in: dict[str, str] = {}
    outs: dict[str, str] = {}
    for i in elements:
        for e in element_edges(circuit, i, signal, cascoded=cascoded):
            if e.target == node and e.source in group:
                (passive_in if e.passive else active_in).setdefault(e.element, e.target_pin)
            elif e.source == node and e.target in group:
                outs.setdefault(e.element, e.source_pin)
    drivers = active_in or passive_in
    loads = {el: pin for el, pin in outs.items() if el not in drivers}
    single = len(drivers) == 1
    high_z = bool(loads) and all(pin in CONTROL_PINS for pin in loads.values())
    low_z = False
    if single and active_in:
        (el, pin), = active_in.items()
        element = circuit.element(el)
        low_z = pin in ("s", "e") or element.kind in "EH" or (element.kind == "B" and _voltage_form(element.element.tokens))
    return tuple(drivers), tuple(f"{el}.{pin}" for el, pin in loads.items()), single, high_z, low_z


def rank_candidates(circuit: FlatCircuit, loops: tuple[Loop, ...], signal: frozenset[str], capped: bool,
                    elements_at: dict[str, list[int]] | None = None, group_nodes: frozenset[str] | None = None) -> tuple[BreakCandidate, ...]:
    """Every node that opens at least one of ``loops``, ranked (see the module docstring).

    ``elements_at`` (from ``touching``) may be given for every node of the loops, to save a pass over the circuit.
    ``group_nodes`` are the real nodes of the group (looked-through nodes and nodes joined by 0 V sources
    included); by default the nodes of the loops' steps.
    """
    order = {n: i for i, n in enumerate(circuit.nets)}
    group = group_nodes if group_nodes is not None else frozenset(n for lp in loops for n in lp.passes)
    opened: dict[str, list[int]] = {}
    for k, lp in enumerate(loops, 1):
        for n in lp.opened_by:
            opened.setdefault(n, []).append(k)
    total = len(loops)
    if elements_at is None:
        elements_at = touching(circuit, set(opened))
    rows = []
    cascoded = cascode_diodes(circuit, signal)
    for node, nums in opened.items():
        drivers, loads, single, high_z, low_z = _roles(circuit, node, group, signal, elements_at[node], cascoded)
        all_ = len(nums) == total
        left = tuple(k for k in range(1, total + 1) if k not in nums)
        key = (not all_, -len(nums), not single, not high_z, not low_z, node.count("."), order.get(node, 0))
        rows.append((key, node, tuple(nums), left, drivers, loads, single, high_z, low_z))
    rows.sort(key=lambda r: r[0])
    out = []
    for rank, (_, node, nums, left, drivers, loads, single, high_z, low_z) in enumerate(rows, 1):
        if not left:
            found = f"all {total} loops found (the search was capped)" if capped else (f"all {total} loops" if total > 1 else "the loop")
            parts = [f"on {found} of the group (which of them a break here opens depends on how the probe splits the node)"]
        else:
            parts = [f"on {len(nums)} of {total} loops ({_numbers(nums)}); a break here leaves loop{'s' if len(left) > 1 else ''} {_numbers(left)} closed"
                     " (and possibly more, depending on how the probe splits the node)"]
        if single:
            parts.append(f"driven by one element ({drivers[0]})")
        elif drivers:
            parts.append(f"driven by {len(drivers)} elements ({', '.join(drivers)})")
        if high_z:
            parts.append(f"it drives only high-impedance inputs ({', '.join(loads)})")
        if low_z:
            parts.append("its driver is a low-impedance output (follower or controlled voltage source)")
        out.append(BreakCandidate(node, rank, not left, nums, left, drivers, loads, single, high_z, low_z, "; ".join(parts)))
    return tuple(out)
