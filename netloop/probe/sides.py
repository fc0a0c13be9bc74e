"""Which terminals at a node drive it and which load it: the driver side and the load side of a break."""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass

from netloop.errors import ProbeError
from netloop.netlist.model import Element, Netlist
from netloop.probe.scope import GROUND_NAMES, Scope, child_scope, elements_of, find_definition, flattener, pin_names, walk_scopes

__all__ = ["Split", "Terminal", "ac_ground_nodes", "decide_sides", "terminals_at"]

# Output terminals of each element letter; a source/emitter drives only when the drain/collector is AC ground.
_OUTPUTS = {"E": ("p", "n"), "G": ("p", "n"), "F": ("p", "n"), "H": ("p", "n"), "B": ("p", "n")}
_FOLLOWER = {"M": ("d", "s"), "Q": ("c", "e"), "J": ("d", "s"), "Z": ("d", "s")}  # (main output, follower output)
_PASSIVE_PATH = frozenset("RCL")
_ACTIVE_LOADS = frozenset("MQJZEGFHBX")
_LOCAL_DEPTH = 3  # passive elements in a compensation path around the driver (Cc and Rz are two)


@dataclass(frozen=True, slots=True)
class Terminal:
    """One terminal at the broken node: which element, which slot, its pin name and its role."""

    element: Element
    slot: int
    pin: str
    role: str  # "driver", "load" or "shunt" (connects the node only to AC ground)
    label: str  # "m6.d", "xamp.m6.d", "xamp.out"


@dataclass(frozen=True, slots=True)
class Split:
    driver: tuple[Terminal, ...]
    load: tuple[Terminal, ...]
    shunt: tuple[Terminal, ...]  # placed on the load side; never change T
    decided_by: str


def ac_ground_nodes(netlist: Netlist, globals_: frozenset[str]) -> frozenset[str]:
    """Flat nodes at AC ground: ground, .global nets, and nodes tied to them by independent V sources."""
    ground = set(GROUND_NAMES) | set(globals_)
    links: dict[str, set[str]] = {}
    by_element: dict[tuple, list[str]] = {}
    for scope in walk_scopes(netlist, globals_):  # V sources are primitive: no need to expand anything
        flat = flattener(scope, globals_)
        for e in elements_of(netlist, scope):
            if e.name[0] in "vV":
                by_element.setdefault((scope.path, e.key), []).extend(map(flat, e.nodes))
    for a, b in (nodes for nodes in by_element.values() if len(nodes) == 2):
        links.setdefault(a, set()).add(b)
        links.setdefault(b, set()).add(a)
    todo = deque(ground)
    while todo:
        n = todo.popleft()
        for m in links.get(n, ()):
            if m not in ground:
                ground.add(m)
                todo.append(m)
    return frozenset(ground)


def _role(netlist: Netlist, scope: Scope, e: Element, slot: int, pin: str, ac_ground: frozenset[str], globals_: frozenset[str], depth: int = 0) -> str:
    kind = e.kind
    flat_others = [scope.flat(n, globals_) for k, n in enumerate(e.nodes) if k != slot]
    if kind in _OUTPUTS:
        return "driver" if pin in _OUTPUTS[kind] else "load"
    if kind in _FOLLOWER:
        main, follower = _FOLLOWER[kind]
        if pin == main:
            return "driver"
        if pin == follower:
            pins = e.pins
            drain = scope.flat(e.nodes[pins.index(main)], globals_) if main in pins else None
            return "driver" if drain in ac_ground else "load"
        return "load"
    if kind == "X":
        return _instance_role(netlist, scope, e, slot, ac_ground, globals_, depth)
    if kind == "I":
        return "shunt"
    if all(n in ac_ground for n in flat_others):
        return "shunt"
    return "load"


def _instance_role(netlist: Netlist, scope: Scope, e: Element, slot: int, ac_ground, globals_, depth: int) -> str:
    """An instance pin is an output when, inside, a driver terminal sits on the net it connects to."""
    child = child_scope(netlist, scope, e, globals_)
    if child is None or depth > 64:
        model = (e.model or "").lower()
        if "fet" in model and len(e.node_slots) == 4:  # a device wrapper whose definition is not loaded
            proxy = Element(e.name.replace(e.name[0], "M", 1), e.tokens, e.node_slots, ("d", "g", "s", "b"), e.location, e.model)
            return _role(netlist, scope, proxy, slot, ("d", "g", "s", "b")[slot], ac_ground, globals_, depth)
        return "load"
    inner_net = child.definitions[-1].pins[slot]
    roles = set()
    for inner in elements_of(netlist, child):
        definition = find_definition(netlist, child.definitions, inner.model or "") if inner.kind == "X" else None
        pins = pin_names(inner, definition)
        for k, node in enumerate(inner.nodes):
            if node == inner_net:
                roles.add(_role(netlist, child, inner, k, pins[k] if k < len(pins) else str(k + 1), ac_ground, globals_, depth + 1))
    if "driver" in roles:
        return "driver"
    if roles == {"shunt"}:
        return "shunt"
    return "load"


def terminals_at(netlist: Netlist, scope: Scope, node: str, ac_ground: frozenset[str], globals_: frozenset[str]) -> tuple[Terminal, ...]:
    """Every terminal on a node in its own scope, each with its role by default."""
    out = []
    for e in elements_of(netlist, scope):
        nodes = e.nodes
        if node not in nodes:
            continue
        definition = find_definition(netlist, scope.definitions, e.model or "") if e.kind == "X" else None
        pins = pin_names(e, definition)
        for k, n in enumerate(nodes):
            if n == node:
                pin = pins[k] if k < len(pins) else str(k + 1)
                role = _role(netlist, scope, e, k, pin, ac_ground, globals_)
                out.append(Terminal(e, k, pin, role, f"{scope.label(e)}.{pin}"))
    return tuple(out)


def _controls(netlist: Netlist, scope: Scope, driver: Terminal, globals_) -> set[str]:
    """Local nodes that control a driver element (its gate, base, controlling nodes, other pins)."""
    e = driver.element
    definition = find_definition(netlist, scope.definitions, e.model or "") if e.kind == "X" else None
    pins = pin_names(e, definition)
    if e.kind in _FOLLOWER or e.kind in _OUTPUTS:
        skip = {*_FOLLOWER.get(e.kind, ()), *_OUTPUTS.get(e.kind, ()), "sub", *(("b",) if e.kind == "M" else ())}
        return {n for k, n in enumerate(e.nodes) if k < len(pins) and pins[k] not in skip}
    return {n for k, n in enumerate(e.nodes) if k != driver.slot}


def _passive_index(netlist: Netlist, scope: Scope) -> dict[str, list[Element]]:
    """R, C and L elements of a scope by the nodes they touch."""
    index: dict[str, list[Element]] = {}
    for e in elements_of(netlist, scope):
        if e.name[0].upper() in _PASSIVE_PATH:  # e.kind, without the call: this runs over every element
            for n in set(e.nodes):
                here = index.get(n)
                if here is None:
                    index[n] = [e]
                else:
                    here.append(e)
    return index


def _local_feedback(scope: Scope, node: str, t: Terminal, controls: set[str], index, ac_ground, globals_) -> bool:
    """Whether a passive element at the node leads through at most three R, C, L in all to a driver's control node
    (a compensation network such as a Miller Cc with its nulling Rz)."""
    if t.element.kind not in _PASSIVE_PATH:
        return False
    start = [n for k, n in enumerate(t.element.nodes) if k != t.slot and n != node]
    seen = set(start)
    todo = deque((n, 1) for n in start)
    while todo:
        n, depth = todo.popleft()
        if n in controls:
            return True
        if depth >= _LOCAL_DEPTH or scope.flat(n, globals_) in ac_ground:
            continue
        for e in index.get(n, ()):
            if e is not t.element:
                for m in e.nodes:
                    if m not in seen and m != node:
                        seen.add(m)
                        todo.append((m, depth + 1))
    return False


def _fed_by_output(netlist: Netlist, scope: Scope, node: str, t: Terminal, ac_ground, globals_) -> bool:
    """Whether a passive element at the node has its other end on a node an active output drives (a divider, a series Ro)."""
    if t.element.kind not in _PASSIVE_PATH:
        return False
    for k, far in enumerate(t.element.nodes):
        if k == t.slot or far == node or scope.flat(far, globals_) in ac_ground:
            continue
        if any(u.role == "driver" for u in terminals_at(netlist, scope, far, ac_ground, globals_)):
            return True
    return False


def _matches(spec: str, t: Terminal, scope: Scope) -> bool:
    local = f"{t.element.key}.{t.pin}"
    return spec in (t.label, local, scope.label(t.element), t.element.key)


def decide_sides(netlist: Netlist, scope: Scope, node: str, terminals: tuple[Terminal, ...], driver: str | None, ac_ground, globals_) -> Split:
    """Put each terminal on the driver or the load side, by the given override or from the circuit."""
    name = ".".join((*scope.path, node))
    listing = ", ".join(f"{t.label} ({t.role})" for t in terminals)
    if driver is not None:
        specs = [s.strip().lower() for s in driver.split(",") if s.strip()]
        if not specs:
            raise ProbeError(f"driver={driver!r} names no element; terminals at {name}: {listing}")
        chosen = []
        for spec in specs:
            hits = [t for t in terminals if _matches(spec, t, scope)]
            if not hits:
                raise ProbeError(f"driver {spec!r} has no terminal on node {name}; terminals there: {listing}")
            chosen.extend(h for h in hits if h not in chosen)
        rest = [t for t in terminals if t not in chosen]
        if not rest:
            raise ProbeError(f"driver={driver!r} takes every terminal of node {name}; leave at least one on the load side")
        shunt = tuple(t for t in rest if t.role == "shunt")
        load = tuple(t for t in rest if t.role != "shunt")
        text = f"driver side given by driver={driver!r}: {', '.join(t.label for t in chosen)}"
        return Split(tuple(chosen), load, shunt, text + _shunt_note(shunt) + ".")
    drivers = [t for t in terminals if t.role == "driver"]
    shunt = tuple(t for t in terminals if t.role == "shunt")
    loads = [t for t in terminals if t.role == "load"]
    through = ""
    if not drivers:
        drivers = [t for t in loads if _fed_by_output(netlist, scope, node, t, ac_ground, globals_)]
        loads = [t for t in loads if t not in drivers]
        through = " through a passive element from an output node" if drivers else ""
    if not drivers:
        candidates = ", ".join(t.label for t in terminals if t.role != "shunt") or listing
        raise ProbeError(
            f"no driver found for node {name}: no transistor drain/collector, controlled-source output or instance output "
            f"sits on it; candidates: {candidates}; name the driver with driver=ELEMENT[.PIN]"
        )
    if not loads and not shunt:
        raise ProbeError(f"node {name} has only driver terminals ({listing}); nothing is left for the load side: use driver= to choose")
    # Compensation around the driver stage (a Miller Cc/Rz) rides with the driver only while an active
    # input (a gate, base, controlling node or instance input) still loads the node: then that input
    # closes the loop being measured. A purely passive feedback network stays on the load side. (Only
    # passive loads can be local, so without both kinds at the node the search, a pass over the whole
    # scope, is skipped.)
    local = []
    if any(t.element.kind in _PASSIVE_PATH for t in loads) and any(t.element.kind in _ACTIVE_LOADS for t in loads):
        controls: set[str] = set()
        for d in drivers:
            controls |= _controls(netlist, scope, d, globals_)
        controls = {n for n in controls if scope.flat(n, globals_) not in ac_ground}
        index = _passive_index(netlist, scope)
        local = [t for t in loads if _local_feedback(scope, node, t, controls, index, ac_ground, globals_)]
        if local and any(t.element.kind in _ACTIVE_LOADS for t in loads if t not in local):
            loads = [t for t in loads if t not in local]
        else:
            local = []
    if through:
        parts = [f"driver side: {', '.join(t.label for t in drivers)} (no active output sits on the node; these lead in one step from "
                 "a node that a drain, collector, controlled source or instance output drives)"]
    else:
        parts = [f"driver side: {', '.join(t.label for t in drivers)} (outputs: drain, collector, controlled-source or instance output"
                 + (", or a follower's source/emitter" if any(t.pin in ("s", "e") for t in drivers) else "") + ")"]
    if local:
        parts.append(f"with {', '.join(t.label for t in local)} (a passive path back to the driver's own input: local feedback of the driver stage)")
    parts.append(f"load side: {', '.join(t.label for t in loads) or 'only elements to AC ground'}")
    own = [t for t in loads if any(t.element is d.element for d in drivers)]
    if own:
        names = ", ".join(t.label for t in own)
        whole = ",".join(dict.fromkeys(t.element.key for t in own))
        parts.append(f"{names} is the driver's own input on the node (a diode connection): its local loop is part of T; "
                     f"driver={whole!r} puts the whole device on the driver side")
    if not loads:
        raise ProbeError(f"node {name}: every terminal but the drivers goes only to AC ground ({listing}); it is not on a loop")
    return Split(tuple([*drivers, *local]), tuple(loads), shunt, "; ".join(parts) + _shunt_note(shunt) + ".")


def _shunt_note(shunt: tuple[Terminal, ...]) -> str:
    if not shunt:
        return ""
    return (f"; {', '.join(t.label for t in shunt)} connect{'s' if len(shunt) == 1 else ''} the node only to AC ground, "
            "which never changes T; placed on the load side (either side gives the same T)")
