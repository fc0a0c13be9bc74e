"""Which subcircuits are device wrappers (one transistor or diode plus parameters and models), and their pin roles."""

from __future__ import annotations

from netloop.netlist.model import Element, Subcircuit

__all__ = ["DEVICE_KINDS", "device_primitive", "device_pin_roles", "is_device_subcircuit"]

# Primitive kinds a process library wraps in a subcircuit (e.g. sky130's sky130_fd_pr__nfet_01v8).
DEVICE_KINDS = frozenset("MQDJZ")


def device_primitive(sub: Subcircuit) -> Element | None:
    """The one primitive a device-wrapper subcircuit holds, or None when ``sub`` is a real circuit.

    A wrapper's body is exactly one M/Q/D/J/Z element plus directives (.param, .model, ...), no
    nested definitions, and every node of that element is one of the subcircuit's pins.
    """
    prim = None
    for s in sub.body:
        if isinstance(s, Element):
            if prim is not None or s.kind not in DEVICE_KINDS:
                return None
            prim = s
        elif isinstance(s, Subcircuit):
            return None
    if prim is None:
        return None
    pins = set(sub.pins)
    if not all(n in pins for n in prim.nodes):
        return None
    return prim


def is_device_subcircuit(sub: Subcircuit) -> bool:
    """Whether an X instance of ``sub`` stands for one device (so it is treated as that device, not expanded)."""
    return device_primitive(sub) is not None


def device_pin_roles(sub: Subcircuit) -> tuple[str, ...]:
    """The device role ("d", "g", "s", "b", ...) of each of the wrapper's pins, in pin order.

    A pin the primitive does not use keeps its own name.
    """
    prim = device_primitive(sub)
    if prim is None:
        raise ValueError(f"subcircuit {sub.name} is not a device wrapper")
    role_of: dict[str, str] = {}
    for node, role in zip(prim.nodes, prim.pins):
        role_of.setdefault(node, role)
    return tuple(role_of.get(p, p) for p in sub.pins)
