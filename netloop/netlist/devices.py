"""Which subcircuits are device wrappers (one transistor or diode plus parameters and models), and their pin roles."""

from __future__ import annotations

import re
from dataclasses import dataclass

from netloop.netlist.model import Directive, Element, Subcircuit

__all__ = ["DEVICE_KINDS", "WrapperSize", "declared_parameters", "device_pin_roles", "device_primitive", "is_device_subcircuit", "wrapper_sizes"]

# Primitive kinds a process library wraps in a subcircuit (e.g. sky130's sky130_fd_pr__nfet_01v8).
DEVICE_KINDS = frozenset("MQDJZ")


_PRIMITIVES: dict[int, tuple[Subcircuit, Element | None]] = {}  # by id: each entry holds its subcircuit, whose id stays its own
_PRIMITIVES_KEEP = 4096


def device_primitive(sub: Subcircuit) -> Element | None:
    """The one primitive a device-wrapper subcircuit holds, or None when ``sub`` is a real circuit.

    A wrapper's body is exactly one M/Q/D/J/Z element plus directives (.param, .model, ...), no
    nested definitions, and every node of that element is one of the subcircuit's pins. The answer
    is kept per subcircuit (they are immutable): a process's wrappers hold hundreds of statements
    (sky130's with mismatch models), and every walk of a netlist's instances asks again.
    """
    kept = _PRIMITIVES.get(id(sub))  # the entry holds sub, so no other object has its id meanwhile
    if kept is not None:
        return kept[1]
    if len(_PRIMITIVES) >= _PRIMITIVES_KEEP:
        _PRIMITIVES.clear()
    prim = _primitive(sub)
    _PRIMITIVES[id(sub)] = (sub, prim)
    return prim


def _primitive(sub: Subcircuit) -> Element | None:
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


# The device's own instance parameters that set its size (SPICE's names, the same in every process):
# width, length, fingers, multiplier; area for junction devices.
_GEOMETRY = {"M": ("w", "l", "nf", "m"), "Q": ("area", "m"), "D": ("area", "w", "l", "m"), "J": ("area", "m"), "Z": ("w", "l", "m")}
_ASSIGNMENT = re.compile(r"([A-Za-z_][\w]*)\s*=\s*(\{[^}]*\}|'[^']*'|\"[^\"]*\"|[^\s=]+)")
_WORD = re.compile(r"[A-Za-z_]\w*")
_BRACED = re.compile(r"\{([^}]*)\}|'([^']*)'")


@dataclass(frozen=True, slots=True)
class WrapperSize:
    """One size parameter of a device wrapper, as the wrapper names and declares it.

    name      the wrapper's parameter (``w``, ``l``, ``nf``, ``mult`` in sky130's wrappers).
    default   its default as the wrapper declares it (text, as written).
    role      the device parameter it sets (``w``, ``l``, ``nf``, ``m``, ``area``), or "" for one the
              wrapper's model cards multiply with a size (a device count in mismatch terms, sky130's ``mult``).
    """

    name: str
    default: str
    role: str


def declared_parameters(sub: Subcircuit) -> tuple[tuple[str, str], ...]:
    """The parameters a subcircuit declares, keys lower-case: on its ``.subckt`` line, then in ``.param`` lines of its body."""
    out = dict(sub.params)
    for s in sub.body:
        if isinstance(s, Directive) and s.keyword == ".param":
            for key, value in _ASSIGNMENT.findall(s.text.partition(" ")[2]):
                out.setdefault(key.lower(), value)
    return tuple(out.items())


def wrapper_sizes(sub: Subcircuit) -> tuple[WrapperSize, ...]:
    """The size parameters of a device wrapper, read from the wrapper itself (no process's names written here).

    A declared parameter is a size when the wrapper's device card hands it to one of the device's own
    size parameters (``w={w}``: width, length, fingers, multiplier, area), or when the wrapper's model
    cards use it in one expression with such a size (``sqrt(l*w*mult)``: a device count that scales the
    mismatch terms). Every other declared parameter is not a size (drain areas and perimeters, stress
    distances: values derived from the sizes or from the layout). () for a subcircuit that is no wrapper.
    """
    prim = device_primitive(sub)
    if prim is None:
        return ()
    declared = dict(declared_parameters(sub))
    sizes: dict[str, WrapperSize] = {}
    for key, value in prim.params:
        if key in _GEOMETRY.get(prim.kind, ()):
            used = [w for w in dict.fromkeys(_WORD.findall(value.lower())) if w in declared]
            if len(used) == 1:  # the device's size follows this one parameter (``{w}``, ``{w*1e-6}``)
                sizes.setdefault(used[0], WrapperSize(used[0], declared[used[0]], key))
    direct = frozenset(sizes)
    for s in sub.body:
        if isinstance(s, Directive) and s.keyword in (".model", ".param") and direct:
            for braced in _BRACED.finditer(s.text):
                words = set(_WORD.findall((braced.group(1) or braced.group(2) or "").lower()))
                if words & direct:
                    for w in sorted(words - direct):
                        if w in declared and w not in sizes and _product(braced.group(0).lower(), w, direct):
                            sizes[w] = WrapperSize(w, declared[w], "")
    return tuple(sizes.values())


def _product(expression: str, word: str, sizes: frozenset[str]) -> bool:
    """Whether ``word`` multiplies a size in ``expression`` (``l*w*mult``): written next to one with ``*`` between."""
    names = "|".join(sorted(sizes))
    pattern = rf"\b(?:{names})\s*\*\s*(?:\w+\s*\*\s*)*{word}\b|\b{word}\s*\*\s*(?:\w+\s*\*\s*)*(?:{names})\b"
    return re.search(pattern, expression) is not None
