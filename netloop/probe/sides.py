"""Which terminals at a node drive it and which load it: the driver side and the load side of a break.

The rules, from circuit theory (docs/splitting.md says them for designers):

* An element with several terminals on the node goes to one side whole. When its other
  terminals are all at AC ground it is a one-port to AC ground (a diode-connected transistor, a
  current source, a capacitor to a supply): a shunt, which gives the same T on either side.
* Outputs drive: a drain or collector whose gate or base carries signal, a controlled source's
  output, an instance pin with a driver inside, a follower's source or emitter. A common-gate
  (cascode) device or a switch, whose gate is at AC ground, drives only when no other output does.
* A voltage source in series (0 V to sense a current, a level shift) has no AC impedance: it is
  looked through, and goes with what sits on its far side.
* A passive element from the node to another signal node bridges the split. It goes with the
  active element it is in parallel with, within a few passive elements and stages (a Miller
  capacitor stays with the stage it wraps: with the driver at that stage's output, with the load
  at its input; a nested Miller capacitor goes with the stages it wraps inverting when the nearer
  side's path does not invert); otherwise, or when both sides are as close, it goes with the load, and the
  measurement's self-checks confirm the placement (netloop.jobs.measure tries the other one when
  they fail). Elements in parallel are one branch: a chain of diode-connected devices (a
  pseudo-resistor) beside a feedback capacitor goes where the capacitor goes, and a
  diode-connected device is no stage that a bridge could wrap.
* A node no output sits on (an amplifier's input) is driven by the passive elements that bring the
  signal from an output sooner than they lead on to an input, with the switches and
  pseudo-resistors beside them; inside an instance, by the net outside when that is how it is fed.
"""

from __future__ import annotations

from collections import deque
from collections.abc import Mapping
from dataclasses import dataclass, replace

from netloop.errors import ProbeError
from netloop.netlist.cards import expression_references
from netloop.netlist.devices import is_device_subcircuit
from netloop.netlist.model import Element, Netlist
from netloop.probe.scope import (GROUND_NAMES, Scope, child_scope, elements_of, find_definition, flattener, pin_names, primitive_elements,
                                 scope_of_path, walk_scopes)

__all__ = ["Bridge", "PIN_ELEMENT", "Split", "Terminal", "ac_ground_nodes", "decide_sides", "fed_terminals", "terminals_at"]

# Output terminals of each element letter; a source/emitter drives only when the drain/collector is AC ground.
_OUTPUTS = {"E": ("p", "n"), "G": ("p", "n"), "F": ("p", "n"), "H": ("p", "n"), "B": ("p", "n")}
_FOLLOWER = {"M": ("d", "s"), "Q": ("c", "e"), "J": ("d", "s"), "Z": ("d", "s")}  # (main output, follower output)
_CONTROL = {"M": "g", "Q": "b", "J": "g", "Z": "g"}
_BULK = frozenset({"b", "sub"})
_PASSIVE_PATH = frozenset("RCL")
_ACTIVE = frozenset("MQJZEGFHBX")
_TRANSISTOR_KINDS = frozenset(_CONTROL) | {"X"}  # X: a device wrapper or a block, whose terminals on both ends make it a diode connection
_LOCAL_DEPTH = 3  # passive elements in a compensation path around a stage (Cc and Rz are two)
# Instance levels below a node within which an instance pin is looked through for passive elements that bring the signal
# from an output (_instance_role). Our choice: a model's output resistance sits a level or two down; each level may ask
# the roles of several pins of the level below, so the look is kept shallow (a block that instantiates itself would
# otherwise ask 2 to the 64th).
_THROUGH_DEPTH = 4
_STAGE_DEPTH = 2  # active stages a compensation path may wrap (Miller: one; nested Miller: two)
# Active stages an inverting path may take around a nested Miller capacitor that closes a non-inverting loop on the
# other side (_nested_miller): the outer capacitor of a three-stage amplifier wraps its last two stages, and a
# differential second stage with a mirror load counts as two of them (the pair's gate to the mirror, the mirror's gate
# to its output), so three.
_NESTED_DEPTH = 3
# The sign of a transistor's gain from one terminal to another (gate or base to drain or collector inverts; a follower's
# gate to source and a common-gate source to drain do not); a step not listed has no sign the rules read.
_STEP_SIGN = {("g", "d"): -1, ("g", "s"): 1, ("s", "d"): 1, ("b", "c"): -1, ("b", "e"): 1, ("e", "c"): 1}

PIN_ELEMENT = Element("<pin>", (), (), (), None)  # type: ignore[arg-type]
"""Stands for the rest of a net outside an instance, when a node inside it that is one of its pins is broken there."""


@dataclass(frozen=True, slots=True)
class Terminal:
    """One terminal at the broken node: which element, which slot, its pin name and its role."""

    element: Element
    slot: int  # -1 for the pin of the scope's own definition (PIN_ELEMENT: the net outside the instance)
    pin: str
    role: str  # "driver", "load" or "shunt" (connects the node only to AC ground)
    label: str  # "m6.d", "xamp.m6.d", "xamp.out"
    via: str = ""  # for a series voltage source: what sits on its far side ("m5.d")
    whole: bool = False  # one of several (non-bulk) terminals of one element on the node: the element is one unit
    fed: str = ""  # for the net outside an instance: its passive elements that bring the signal from an output ("rf2.n")
    tied: str = ""  # the label of a series voltage source at the node whose far side holds another terminal of this element:
    # the element is one unit across the source (a diode connected through a 0 V sense source), so it goes with the source


@dataclass(frozen=True, slots=True)
class Bridge:
    """A passive element from the node to another signal node, and on which side it was put and why."""

    element: str  # its label: "cc", "xamp.rz"
    side: str  # "driver" or "load"
    reason: str  # one clause: "in parallel with m6 (gate o1 to drain out): local feedback of the driver stage"
    by_rule: bool  # True when a stage it wraps decided; False when it was a default (the checks confirm it)
    given: bool = False  # placed by the caller (placement=)


@dataclass(frozen=True, slots=True)
class Split:
    driver: tuple[Terminal, ...]
    load: tuple[Terminal, ...]
    shunt: tuple[Terminal, ...]  # placed on the load side; never change T
    decided_by: str
    bridges: tuple[Bridge, ...] = ()  # the bridging elements among driver and load, and why each went where it did
    inputs_only: bool = False  # driver= named only inputs (gates, bases, control inputs) on the node
    readers: tuple[str, ...] = ()  # with no load terminal: the behavioural elements whose expression reads the node

    @property
    def outputs(self) -> tuple[str, ...]:
        """Labels of the terminals on the node that drive it by the rules (whatever side they were put on)."""
        return tuple(t.label for t in (*self.driver, *self.load) if t.role == "driver")


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


def _grounded(scope: Scope, node: str, ac_ground, globals_) -> bool:
    return scope.flat(node, globals_) in ac_ground


def _role(netlist: Netlist, scope: Scope, e: Element, slot: int, pin: str, ac_ground: frozenset[str], globals_: frozenset[str], depth: int = 0) -> str:
    """The role of one terminal on its own: "driver", "cg" (a common-gate device's drain or a switch: drives only
    when nothing else does), "load", "shunt" or "series" (an independent voltage source to another signal node)."""
    kind = e.kind
    if kind in _OUTPUTS:
        return "driver" if pin in _OUTPUTS[kind] else "load"
    if kind in _FOLLOWER:
        main, follower = _FOLLOWER[kind]
        pins = e.pins

        def at(p: str) -> str | None:
            return scope.flat(e.nodes[pins.index(p)], globals_) if p in pins else None

        control = at(_CONTROL[kind])
        if pin == main:
            if control not in ac_ground:
                return "driver"
            return "shunt" if at(follower) in ac_ground else "cg"
        if pin == follower:
            if at(main) in ac_ground:
                return "driver" if control not in ac_ground else "shunt"
            return "load"
        return "load"
    if kind == "X":
        return _instance_role(netlist, scope, e, slot, ac_ground, globals_, depth)
    if kind == "I":
        return "shunt"
    others = [scope.flat(n, globals_) for k, n in enumerate(e.nodes) if k != slot]
    if all(n in ac_ground for n in others):
        return "shunt"
    if kind == "V":
        return "series"
    return "load"


def _instance_role(netlist: Netlist, scope: Scope, e: Element, slot: int, ac_ground, globals_, depth: int) -> str:
    """An instance pin is an output when, inside, a driver terminal sits on the net it connects to, or passive elements
    bring the signal to that net from one (_fed)."""
    child = child_scope(netlist, scope, e, globals_)
    if child is None or depth > 64:
        model = (e.model or "").lower()
        if "fet" in model and len(e.node_slots) == 4:  # a device wrapper whose definition is not loaded
            proxy = Element(e.name.replace(e.name[0], "M", 1), e.tokens, e.node_slots, ("d", "g", "s", "b"), e.location, e.model)
            return _role(netlist, scope, proxy, slot, ("d", "g", "s", "b")[slot], ac_ground, globals_, depth)
        return "load"
    inner_net = child.definitions[-1].pins[slot]
    inside = terminals_at(netlist, child, inner_net, ac_ground, globals_, depth + 1)
    roles = {t.role for t in inside}
    if "driver" in roles:
        return "driver"
    if "cg" in roles:
        return "cg"
    if roles <= {"shunt"}:
        return "shunt"
    # an output behind passive elements (a model's output resistance): the inside brings the signal from an output through
    # them, sooner than it leads on to an input (the rule for a node without an output on it, applied inside)
    passive = [t for t in inside if t.role == "load" and t.slot >= 0 and t.element.kind in _PASSIVE_PATH] if depth < _THROUGH_DEPTH else []
    if passive and _fed(_Neighbourhood(netlist, child, ac_ground, globals_, depth + 1), inner_net, passive):
        return "driver"
    return "load"


def _device_pins(netlist: Netlist, scope: Scope, e: Element) -> tuple[str, ...]:
    definition = find_definition(netlist, scope.definitions, e.model or "") if e.kind == "X" else None
    return pin_names(e, definition)


def terminals_at(netlist: Netlist, scope: Scope, node: str, ac_ground: frozenset[str], globals_: frozenset[str], depth: int = 0,
                 _through: frozenset[str] = frozenset()) -> tuple[Terminal, ...]:
    """Every terminal on a node in its own scope, each with its role by the rules of this module.

    An element with several terminals on the node is one unit: a shunt when its other terminals are
    at AC ground (a diode-connected transistor), else a load (a bridge, placed whole). A series
    voltage source takes the role of what sits on its far side (looked through, as far as it goes).
    """
    out = []
    sources: list[Element] = []  # the voltage sources of the scope: they join nodes for AC
    for e in elements_of(netlist, scope):
        nodes = e.nodes
        if e.kind == "V":
            sources.append(e)
        if node not in nodes:
            continue
        pins = _device_pins(netlist, scope, e)
        slots = [k for k, n in enumerate(nodes) if n == node]
        pin_of = [pins[k] if k < len(pins) else str(k + 1) for k in slots]
        main = [k for k, p in zip(slots, pin_of) if p not in _BULK] or slots
        via = ""
        if len(main) > 1 and e.kind == "X" and child_scope(netlist, scope, e, globals_) is not None and not _is_device(netlist, scope, e):
            # a block's pins are separate ports (a buffer's output wired to its own input is its feedback wire)
            out.extend(_terminals_of_block(netlist, scope, e, slots, pin_of, ac_ground, globals_, depth))
            continue
        if len(main) > 1:  # one unit: a one-port to AC ground, or a bridge placed whole
            rest = [n for k, n in enumerate(nodes) if n != node and (k >= len(pins) or pins[k] not in _BULK)]
            role = "shunt" if all(_grounded(scope, n, ac_ground, globals_) for n in rest) else "load"
        else:
            k = main[0]
            role = _role(netlist, scope, e, k, pins[k] if k < len(pins) else str(k + 1), ac_ground, globals_, depth)
            if role == "series":
                role, via = _through_source(netlist, scope, node, e, ac_ground, globals_, depth, _through | {node})
        whole = len(main) > 1
        out.extend(Terminal(e, k, p, role, f"{scope.label(e)}.{p}", via, whole) for k, p in zip(slots, pin_of))
    return _units_across_sources(netlist, scope, node, tuple(out), sources, ac_ground, globals_)


def _units_across_sources(netlist: Netlist, scope: Scope, node: str, terminals: tuple[Terminal, ...], sources: list[Element],
                          ac_ground, globals_) -> tuple[Terminal, ...]:
    """The terminals with each element that also sits beyond a series voltage source at the node made one unit with that
    source: a 0 V source has no AC impedance, so a transistor whose drain is beyond it and whose gate is on the node is
    diode-connected (a one-port to AC ground when its other terminals are there), and it goes to the source's side whole."""
    ours = [t for t in terminals if t.role == "series" or t.via or (t.element.kind == "V" and t.slot >= 0)]
    if not ours:
        return terminals
    # the nodes each source terminal at the node joins to it, through chains of voltage sources
    joined: dict[str, str] = {}  # joined node -> the label of the source terminal at the node that leads there
    for t in ours:
        if t.element.kind != "V":
            continue
        todo = [n for n in t.element.nodes if n != node]
        while todo:
            n = todo.pop()
            if n in joined or n == node or _grounded(scope, n, ac_ground, globals_):
                continue
            joined[n] = joined.get(n, t.label)
            for v in sources:
                if n in v.nodes:
                    todo.extend(m for m in v.nodes if m != n and m not in joined)
    if not joined:
        return terminals
    out = []
    for t in terminals:
        e = t.element
        if t.slot < 0 or e.kind == "V":
            out.append(t)
            continue
        pins = _device_pins(netlist, scope, e)
        signal = [n for k, n in enumerate(e.nodes) if not (k < len(pins) and pins[k] in _BULK)]
        across = [n for n in signal if n in joined]
        if not across:
            out.append(t)
            continue
        rest = [n for n in signal if n != node and n not in joined]
        role = "shunt" if all(_grounded(scope, n, ac_ground, globals_) for n in rest) else "load"
        out.append(replace(t, role=role, whole=True, tied=joined[across[0]]))
    return tuple(out)


def _is_device(netlist: Netlist, scope: Scope, e: Element) -> bool:
    definition = find_definition(netlist, scope.definitions, e.model or "")
    return definition is not None and is_device_subcircuit(definition)


def _terminals_of_block(netlist: Netlist, scope: Scope, e: Element, slots: list[int], pins: list[str], ac_ground, globals_, depth: int) -> list[Terminal]:
    """The pins of one subcircuit instance on a node, each with its own role."""
    return [Terminal(e, k, p, _role(netlist, scope, e, k, p, ac_ground, globals_, depth), f"{scope.label(e)}.{p}") for k, p in zip(slots, pins)]


def _through_source(netlist: Netlist, scope: Scope, node: str, source: Element, ac_ground, globals_, depth: int, through: frozenset[str]) -> tuple[str, str]:
    """The role of a series voltage source at ``node``: that of what sits on its far side (it has no AC impedance)."""
    far = [n for n in source.nodes if n != node and n not in through]
    if not far:
        return "load", ""
    found = [t for t in terminals_at(netlist, scope, far[0], ac_ground, globals_, depth, through) if t.element is not source]
    for role in ("driver", "cg"):
        hits = [t.label for t in found if t.role == role]
        if hits:
            return role, ", ".join(hits)
    if all(t.role == "shunt" for t in found):
        return "shunt", ""
    return "load", ", ".join(t.label for t in found if t.role == "load")


# --------------------------------------------------------------------------------------------------
# Bridging elements: which stage does a passive path from the node wrap?


class _Neighbourhood:
    """The elements of one scope by the nodes they touch, built once per split (only when a bridge must be placed)."""

    def __init__(self, netlist: Netlist, scope: Scope, ac_ground, globals_, depth: int = 0):
        self.netlist, self.scope, self.ac_ground, self.globals_ = netlist, scope, ac_ground, globals_
        self.depth = depth  # how deep inside instances the roles are asked (_instance_role's nesting guard)
        self.at: dict[str, list[tuple[Element, int, str]]] = {}
        for e in elements_of(netlist, scope):
            pins = _device_pins(netlist, scope, e)
            for k, n in enumerate(e.nodes):
                self.at.setdefault(n, []).append((e, k, pins[k] if k < len(pins) else str(k + 1)))
        self._roles: dict[tuple[int, int], str] = {}

    def grounded(self, node: str) -> bool:
        return _grounded(self.scope, node, self.ac_ground, self.globals_)

    def role(self, e: Element, slot: int, pin: str) -> str:
        key = (id(e), slot)
        role = self._roles.get(key)
        if role is None:
            role = self._roles[key] = _role(self.netlist, self.scope, e, slot, pin, self.ac_ground, self.globals_, self.depth)
        return role

    def other_nodes(self, e: Element, slot: int) -> list[str]:
        """The signal nodes of an element other than the one at ``slot`` (bulk and AC ground left out)."""
        pins = _device_pins(self.netlist, self.scope, e)
        node = e.nodes[slot]
        return [n for k, n in enumerate(e.nodes) if n != node and not (k < len(pins) and pins[k] in _BULK) and not self.grounded(n)]

    def passive_reach(self, start: list[str], avoid: str, diodes: bool = False) -> dict[str, int]:
        """Nodes reached from ``start`` through at most _LOCAL_DEPTH R, C, L elements (the first counted as 1), and
        diode-connected transistors too with ``diodes``; series voltage sources are looked through; never through
        ``avoid`` or AC ground."""
        depth = {n: 1 for n in start if n != avoid and not self.grounded(n)}
        todo = deque(depth)
        while todo:
            n = todo.popleft()
            for e, k, _ in self.at.get(n, ()):
                kind = e.kind
                if kind == "V":
                    step = 0
                elif (kind in _PASSIVE_PATH or (diodes and self.two_terminal(e))) and depth[n] < _LOCAL_DEPTH:
                    step = 1
                else:
                    continue
                for m in e.nodes:
                    if m != avoid and m not in depth and not self.grounded(m):
                        depth[m] = depth[n] + step
                        (todo.appendleft if step == 0 else todo.append)(m)
        return depth

    def two_terminal(self, e: Element) -> bool:
        """A diode-connected transistor: its control pin on its drain or collector."""
        return _diode_connected(self.netlist, self.scope, e)

    def parallel_reach(self, t: Terminal, avoid: str) -> set[str]:
        """Nodes reached from terminal ``t``'s element through at most _LOCAL_DEPTH two-terminal elements: R, C, L and
        diode-connected transistors (a pseudo-resistor's devices), series voltage sources looked through; never
        through ``avoid`` or AC ground. A bridge's end reached this way is the far end of a branch in parallel with it."""
        return set(self.passive_reach(self.other_nodes(t.element, t.slot), avoid, diodes=True))

    def beyond(self, source: Terminal, node: str, roles: tuple[str, ...]) -> list[tuple[Element, int]]:
        """The active terminals of the given roles on the far side of a series voltage source at ``node`` (looked through)."""
        seen, todo, out = {node}, [n for n in source.element.nodes if n != node], []
        while todo:
            n = todo.pop()
            if n in seen or self.grounded(n):
                continue
            seen.add(n)
            for e, k, pin in self.at.get(n, ()):
                if e.kind == "V":
                    todo.extend(m for m in e.nodes if m not in seen)
                elif e.kind in _ACTIVE and self.role(e, k, pin) in roles:
                    out.append((e, k))
        return out

    def onward(self, starts: list[Terminal], avoid: str) -> set[str]:
        """Signal nodes reached from the terminals ``starts`` at node ``avoid`` along the signal's way: through passive
        elements and series voltage sources both ways, and through an active element from an input to its outputs;
        never through ``avoid`` or AC ground."""
        seen: set[str] = set()
        todo: deque[str] = deque()

        def visit(nodes) -> None:
            for m in nodes:
                if m != avoid and m not in seen:
                    seen.add(m)
                    todo.append(m)

        for t in starts:
            if t.slot >= 0:
                visit(self.other_nodes(t.element, t.slot))
        while todo:
            n = todo.popleft()
            for e, k, pin in self.at.get(n, ()):
                kind = e.kind
                if kind in _PASSIVE_PATH or kind == "V":
                    visit(self.other_nodes(e, k))
                elif kind in _ACTIVE and self.role(e, k, pin) == "load":
                    visit(self.outputs(e, k, pin))
        return seen

    def outputs(self, e: Element, slot: int, pin: str) -> list[str]:
        """Where the signal at an input of an active element goes: a gate or base to the drain and source (collector
        and emitter), a source or emitter to the drain (collector), a control input to the output; else every other node."""
        pins = _device_pins(self.netlist, self.scope, e)
        kind = e.kind
        if kind == "X" and "d" in pins and "g" in pins:
            kind = "M"
        if kind in _FOLLOWER:
            main, follower = _FOLLOWER[kind]
            wanted = (main, follower) if pin == _CONTROL[kind] else (main,)
        elif kind in _OUTPUTS:
            wanted = _OUTPUTS[kind]
        else:
            return self.other_nodes(e, slot)
        return [n for k, n in enumerate(e.nodes) if k < len(pins) and pins[k] in wanted and n != e.nodes[slot] and not self.grounded(n)]

    def stages(self, node: str, starts: list[tuple[Element, int]], direction: str,
               depth: int = _STAGE_DEPTH) -> dict[str, tuple[int, str, int | None]]:
        """Nodes one or two active stages away from ``node``: back through its drivers' inputs ("driver"), or on
        through its loads' outputs ("load"). Each maps to (stages, the element of the first stage, the sign of the
        gain along the way: -1 inverting, 1 not, None when a step has no sign the rules read or the shortest ways
        disagree)."""
        found: dict[str, tuple[int, str, int | None]] = {}
        frontier = [(e, k, self.scope.label(e), 1) for e, k in starts]
        for level in range(1, depth + 1):
            reached = []
            for e, k, first, sign in frontier:
                for m in self.other_nodes(e, k):
                    step = self.step_sign(e, k, m, direction)
                    way = None if sign is None or step is None else sign * step
                    if m != node and m not in found:
                        found[m] = (level, first, way)
                        reached.append((m, first))
                    elif m in found and found[m][0] == level and found[m][2] != way:
                        found[m] = (level, found[m][1], None)
            frontier = []
            for m, first in reached:
                sign = found[m][2]
                for e, k, pin in self.at.get(m, ()):
                    if e.kind not in _ACTIVE or node in e.nodes or self.two_terminal(e):
                        continue
                    role = self.role(e, k, pin)
                    if (direction == "driver" and role in ("driver", "cg")) or (direction == "load" and role == "load"):
                        frontier.append((e, k, first, sign))
        return found

    def step_sign(self, e: Element, slot: int, to: str, direction: str) -> int | None:
        """The sign of a transistor's gain between its terminal at ``slot`` and its terminal on node ``to``: from that
        terminal's input back to it ("driver"), or from it on to that output ("load"); None for other elements."""
        pins = _device_pins(self.netlist, self.scope, e)
        kind = "M" if e.kind == "X" and "d" in pins and "g" in pins else e.kind
        if kind not in _FOLLOWER or slot >= len(pins):
            return None
        here = pins[slot]
        signs = {_STEP_SIGN.get((there, here) if direction == "driver" else (here, there))
                 for k, there in enumerate(pins) if k < len(e.nodes) and e.nodes[k] == to}
        return signs.pop() if len(signs) == 1 else None


def _diode_connected(netlist: Netlist, scope: Scope, e: Element) -> bool:
    """A transistor whose control pin sits on its drain or collector: a two-terminal element (a diode, a pseudo-resistor's half)."""
    if e.kind not in _CONTROL:
        return False
    pins = _device_pins(netlist, scope, e)
    main, control = _FOLLOWER[e.kind][0], _CONTROL[e.kind]
    if main not in pins or control not in pins or max(pins.index(main), pins.index(control)) >= len(e.nodes):
        return False
    return e.nodes[pins.index(main)] == e.nodes[pins.index(control)]


def _closest(reach: dict[str, int], stages: dict[str, tuple[int, str]]) -> tuple[float, str, str]:
    """(passive elements + stages to the nearest node both reach, that node, the stage's element), or inf."""
    best: tuple[float, str, str] = (float("inf"), "", "")
    for n in sorted(reach):  # sorted: ties resolve the same way under any hash seed
        if n in stages:
            score = reach[n] + stages[n][0]
            if score < best[0]:
                best = (score, n, stages[n][1])
    return best


def _place_bridges(near: _Neighbourhood, node: str, drivers: list[Terminal], loads: list[Terminal],
                   placement: Mapping[str, str]) -> list[tuple[Terminal, Bridge, float]]:
    """Decide the side of every bridging element among the loads: passive elements and multi-terminal units to
    another signal node, and common-gate devices or switches beside a real driver. Each comes with its
    distance to the driver stage (passive elements + stages; inf when it wraps none)."""
    units: dict[int, list[Terminal]] = {}
    for t in loads:
        if t.element.kind in _PASSIVE_PATH or t.element.kind == "D" or t.role == "cg" or t.whole or _switch_like(near, t.element):
            units.setdefault(id(t.element), []).append(t)
    if not units:
        return []
    starts = {"driver": [*((t.element, t.slot) for t in drivers if t.element.kind in _ACTIVE and t.slot >= 0),
                         *(hit for t in drivers if t.via for hit in near.beyond(t, node, ("driver", "cg")))],
              "load": [*((t.element, t.slot) for t in loads if t.element.kind in _ACTIVE and t.role == "load" and t.slot >= 0
                         and id(t.element) not in units and not near.two_terminal(t.element)),
                       *(hit for t in loads if t.via for hit in near.beyond(t, node, ("load",)))]}
    back, on = near.stages(node, starts["driver"], "driver"), near.stages(node, starts["load"], "load")
    far_of = {key: tuple(sorted({n for u in members for n in near.other_nodes(u.element, u.slot)})) for key, members in units.items()}
    out = []
    for key, members in units.items():
        t = members[0]
        label = t.label.rsplit(".", 1)[0]
        given = placement.get(label)
        if given is not None:
            side = "driver" if given == "driver" else "load"
            out.extend((u, Bridge(label, side, "placed there on request", True, True), 0.0) for u in members)
            continue
        if t.role == "cg":
            bridge = Bridge(label, "driver", "a common-gate device (gate at AC ground) beside the node's other outputs: a cascode or "
                            "a switch, put with them", True)
            out.extend((u, bridge, 0.0) for u in members)
            continue
        reach = near.passive_reach(list(far_of[key]), node)
        d_score, d_node, d_elem = _closest(reach, back)
        l_score, l_node, l_elem = _closest(reach, on)
        parallel: list[Terminal] = []
        if d_score < l_score:
            # Local feedback of the driver stage only if the loop measured comes back to that stage's input through the
            # node's other branches (elements in parallel are one branch: the same far end, or an active load that reaches
            # it through two-terminal elements, such as a pseudo-resistor across a feedback capacitor): then the bridge is
            # a loop inside the loop.
            others = [u for u in loads if far_of.get(id(u.element)) != far_of[key]]
            beside = {id(u.element) for u in others if id(u.element) not in units and u.slot >= 0 and near.two_terminal(u.element)
                      and d_node in near.parallel_reach(u, node)}
            parallel = [u for u in others if id(u.element) in beside]
            others = [u for u in others if id(u.element) not in beside]
            if d_node not in near.onward(others, node) and not any(u.slot < 0 for u in others):  # the net outside: unseen
                d_score = float("inf")
                parallel = []
        nested = _nested_miller(near, node, reach, (back, d_score, d_node, d_elem), (on, l_score, l_node, l_elem), starts,
                                [u for u in loads if far_of.get(id(u.element)) != far_of[key]])
        if nested is not None:
            bridge = Bridge(label, nested[0], nested[1], True)
            parallel = []
        elif d_score < l_score:
            bridge = Bridge(label, "driver", f"closes a local loop around the driver stage {d_elem} (back to {d_node}{_path(reach, d_node)}): "
                            "kept with it", True)
        elif l_score < d_score:
            bridge = Bridge(label, "load", f"closes a local loop around the stage {l_elem} that the node drives (on to {l_node}"
                            f"{_path(reach, l_node)}): kept with it", True)
        elif d_score == float("inf"):
            bridge = Bridge(label, "load", "leads on into the loop: it wraps no stage that the loop measured passes through", True)
        else:
            bridge = Bridge(label, "load", f"as close to the driver stage {d_elem} as to the stage {l_elem} that the node drives: "
                            "put with the load, and confirmed by the measurement's self-checks", False)
        out.extend((u, bridge, d_score) for u in members)
        if bridge.side == "driver":  # a branch in parallel with it goes along (an element goes whole)
            out.extend((u, replace(bridge, element=u.label.rsplit(".", 1)[0], reason=f"in parallel with {label}: {bridge.reason}"), d_score)
                       for u in parallel)
    once: dict[tuple[int, int], tuple[Terminal, Bridge, float]] = {}
    for item in out:  # a branch in parallel with two bridges is placed once
        once.setdefault((id(item[0].element), item[0].slot), item)
    return list(once.values())


def _nested_miller(near: _Neighbourhood, node: str, reach: dict[str, int], driver: tuple, load: tuple,
                   starts: dict[str, list[tuple[Element, int]]], others: list[Terminal]) -> tuple[str, str] | None:
    """(side, reason) for a nested Miller capacitor that the nearest-stage rule would put on the wrong side, else None.

    A Miller capacitor compensates the stages it wraps with an inverting gain: negative local feedback. Around a
    non-inverting path it would close a positive loop, which is no compensation of that stage. In a three-stage amplifier
    in unity gain (our nested-Miller buffer: outer capacitor from the output to the first stage's output) the outer
    capacitor wraps the first stage non-inverting (its input is the output node, through the feedback wire) and the last
    two stages inverting; the nearest-stage rule put it with the first, and T at the output then opened the outer
    compensation loop (PM 22.7 deg against 52.5 deg in ngspice's AC opened by hand at the feedback wire, and closed-loop
    peaking 8.1 dB against ngspice's 3.3 dB). So when the side the nearest stage chose wraps a non-inverting path and the
    other side wraps an inverting one within _NESTED_DEPTH stages through the capacitor's own branch, the capacitor goes
    with the inverting stages. Both ways need a sign the rules read (transistors only); otherwise the nearest-stage rule
    stands."""
    (back, d_score, d_node, _), (on, l_score, l_node, l_elem) = driver, load
    if d_score < l_score:
        near_node, other, direction = d_node, "load", "load"
    elif l_score != float("inf"):
        near_node, other, direction = l_node, "driver", "driver"
    else:
        return None
    chosen = (back if other == "load" else on).get(near_node)
    if chosen is None or chosen[2] != 1:
        return None
    deep = near.stages(node, starts[direction], direction, _NESTED_DEPTH)
    came_back = near.onward(others, node) if other == "driver" else set(reach)  # the loop measured comes back to that stage
    # through the capacitor's own branch (no more passive elements than to the nearest stage), not on through the main
    # feedback network: a capacitor across a follower pass device reaches the amplifier's input only through the divider
    found = sorted((reach[n] + deep[n][0], n) for n in reach
                   if n in deep and deep[n][2] == -1 and n in came_back and reach[n] <= reach[near_node])
    if not found:
        return None
    _, far = found[0]
    if other == "driver":
        return "driver", (f"closes an inverting loop around the driver stages back to {far}{_path(reach, far)} (a nested Miller "
                          f"capacitor): kept with them; around the stage {l_elem} that the node drives it would close a non-inverting one")
    return "load", (f"closes an inverting loop around the stages the node drives (on to {far}{_path(reach, far)}; a nested Miller "
                    f"capacitor): kept with them; around the driver stage it would close a non-inverting one")


def _driver_stage(drivers: list[Terminal], loads: list[Terminal], placement: Mapping[str, str]) -> list[Terminal]:
    """The terminals of the stage that drives the node: its outputs, and the common-gate devices beside them, which go with
    them (a cascode over the output device), as they do behind a series source (``_Neighbourhood.beyond``)."""
    return [*drivers, *(t for t in loads if t.role == "cg" and placement.get(t.label.rsplit(".", 1)[0], "driver") == "driver")]


def _path(reach: dict[str, int], node: str) -> str:
    return "" if reach.get(node, 1) <= 1 else f" through {reach[node]} passive elements"


# --------------------------------------------------------------------------------------------------
# The decision


def _matches(spec: str, t: Terminal, scope: Scope) -> bool:
    if t.slot < 0:  # the net outside the instance
        return spec in ("outside", t.label.split(" ", 1)[0] + ".outside")
    local = f"{t.element.key}.{t.pin}"
    return spec in (t.label, local, scope.label(t.element), t.element.key)


def _whole(terminals: tuple[Terminal, ...], chosen: list[Terminal]) -> list[Terminal]:
    """The chosen terminals and every other terminal of the same elements on the node (an element goes whole)."""
    ids = {id(t.element) for t in chosen if t.whole}
    labels = {t.label for t in chosen} | {t.tied for t in chosen if t.tied}  # a source and what is one unit across it
    return [t for t in terminals if t in chosen or (t.whole and id(t.element) in ids) or t.label in labels or t.tied in labels]


def _given_split(name: str, terminals: tuple[Terminal, ...], driver: str, listing: str, scope: Scope) -> Split:
    specs = [s.strip().lower() for s in driver.split(",") if s.strip()]
    if not specs:
        raise ProbeError(f"driver={driver!r} names no element; terminals at {name}: {listing}")
    chosen: list[Terminal] = []
    for spec in specs:
        hits = [t for t in terminals if _matches(spec, t, scope)]
        if not hits:
            raise ProbeError(f"driver {spec!r} has no terminal on node {name}; terminals there: {listing}")
        chosen.extend(h for h in hits if h not in chosen)
    whole = _whole(terminals, chosen)
    added = [t for t in whole if t not in chosen]
    rest = [t for t in terminals if t not in whole]
    if not rest:
        raise ProbeError(f"driver={driver!r} takes every terminal of node {name}; leave at least one on the load side")
    shunt = tuple(t for t in rest if t.role == "shunt")
    load = tuple(t for t in rest if t.role != "shunt")
    text = f"driver side given by driver={driver!r}: {', '.join(t.label for t in whole)}"
    if added:
        text += f" ({', '.join(t.label for t in added)} too: an element with several terminals on the node goes to one side whole)"
    inputs_only = all(t.role == "load" and (t.element.kind in _ACTIVE or t.slot < 0) for t in whole)
    return Split(tuple(whole), load, shunt, text + _shunt_note(shunt) + ".", inputs_only=inputs_only)


def decide_sides(netlist: Netlist, scope: Scope, node: str, terminals: tuple[Terminal, ...], driver: str | None, ac_ground, globals_,
                 placement: Mapping[str, str] | None = None) -> Split:
    """Put each terminal on the driver or the load side, by the given override or from the circuit.

    ``placement`` maps bridging elements (by label, "cc" or "xamp.cc") to "driver" or "load": it
    overrides the rule for those elements only (netloop.jobs.measure uses it to try the other
    placement when a measurement fails its self-checks).
    """
    name = ".".join((*scope.path, node))
    listing = ", ".join(f"{t.label} ({t.role})" for t in terminals)
    if driver is not None:
        split = _given_split(name, terminals, driver, listing, scope)
        if split.load:
            return split
        readers = tuple(_expression_readers(netlist, globals_, scope.flat(node, globals_)))  # they read the load side, unchanged
        return replace(split, readers=readers, decided_by=split.decided_by.removesuffix(".") + "; " + _read_by(readers) + ".") if readers else split
    tied = [t for t in terminals if t.tied]  # one unit with a series source at the node: they follow it (below)
    free = [t for t in terminals if not t.tied]
    drivers = [t for t in free if t.role == "driver"]
    shunt = [t for t in free if t.role == "shunt"]
    loads = [t for t in free if t.role in ("load", "cg")]
    how = "outputs"
    if not drivers:  # a divider tap, a feedback capacitor at an amplifier's input, and a switch beside it
        near = _Neighbourhood(netlist, scope, ac_ground, globals_)
        fed = [t for t in loads if t.slot < 0 and t.fed] + _fed(near, node, loads)  # the net outside an instance: fed there
        ends = {n for t in fed if t.slot >= 0 for k, n in enumerate(t.element.nodes) if k != t.slot}
        # with them: a switch beside them, and a diode-connected device whose branch (a pseudo-resistor) ends where they do
        drivers = [*fed, *(t for t in loads if t not in fed and (((t.role == "cg" or _switch_like(near, t.element))
                                                                  and any(n in ends for k, n in enumerate(t.element.nodes) if k != t.slot))
                                                                 or (t.slot >= 0 and near.two_terminal(t.element) and ends & near.parallel_reach(t, node))))]
        how = "through" if drivers else how
    if not drivers:  # the output of a folded cascode
        drivers = [t for t in loads if t.role == "cg"]
        how = "cg" if drivers else how
    loads = [t for t in loads if t not in drivers]
    if not drivers:
        candidates = ", ".join(t.label for t in terminals if t.role != "shunt") or listing
        oneports = sorted({t.label.rsplit(".", 1)[0] for t in shunt if t.whole})
        if oneports and all(t.element.kind in _ACTIVE and t.slot >= 0 for t in loads):
            raise ProbeError(
                f"node {name} is not on any loop: besides inputs ({candidates}) only one-ports to AC ground sit on it "
                f"({', '.join(dict.fromkeys(t.label.rsplit('.', 1)[0] for t in shunt))}; {', '.join(oneports)}: several terminals on the node, "
                "a diode connection), and nothing from elsewhere drives it"
            )
        raise ProbeError(
            f"no driver found for node {name}: no transistor drain/collector, controlled-source output or instance output "
            f"sits on it; candidates: {candidates}; name the driver with driver=ELEMENT[.PIN]"
        )
    if not loads and not shunt:
        why = {"through": "each brings the signal from an output through passive elements",
               "cg": "each is a common-gate output"}.get(how, "each is an output")
        raise ProbeError(f"node {name}: the rules put every terminal on the driver side ({', '.join(t.label for t in drivers)}: {why}), "
                         f"so nothing is left for the load side; choose the driver side with driver=ELEMENT[.PIN], e.g. driver={drivers[0].label}")
    placed: list[tuple[Terminal, Bridge, float]] = []
    if loads and (how == "outputs" or placement):
        near = _Neighbourhood(netlist, scope, ac_ground, globals_)
        placed = _place_bridges(near, node, _driver_stage(drivers, loads, placement or {}), loads, placement or {})
    moved = [t for t, b, _ in placed if b.side == "driver"]
    if moved and not [t for t in loads if t not in moved] and any(not b.given for _, b, _ in placed if b.side == "driver"):
        # Every way on from the node would go to the driver side (a one-stage loop, where the feedback network is also
        # "around the driver stage"): the bridges farthest from the driver stage carry the loop being measured.
        far = max(score for _, b, score in placed if b.side == "driver" and not b.given)
        placed = [(t, Bridge(b.element, "load", "the farthest path from the node back to the driver stage: it carries the loop "
                             "being measured", True), score)
                  if b.side == "driver" and not b.given and score == far else (t, b, score) for t, b, score in placed]
        moved = [t for t, b, _ in placed if b.side == "driver"]
    loads = [t for t in loads if t not in moved]
    if not loads:
        readers = _expression_readers(netlist, globals_, scope.flat(node, globals_))  # they read the load side, unchanged
        if not readers:
            raise ProbeError(f"node {name}: every terminal but the drivers goes only to AC ground ({listing}); it is not on a loop")
    else:
        readers = []
    bridges = tuple(dict.fromkeys(b for _, b, _ in placed))
    on_driver = {t.label for t in (*drivers, *moved)}
    with_driver = [t for t in tied if t.tied in on_driver]
    loads += [t for t in tied if t.tied not in on_driver and t.role != "shunt"]
    shunt += [t for t in tied if t.tied not in on_driver and t.role == "shunt"]
    text = _sentence(drivers, moved, loads, shunt, bridges, how, tied, readers)
    return Split(tuple([*drivers, *moved, *with_driver]), tuple(loads), tuple(shunt), text, bridges, readers=tuple(readers))


def _expression_readers(netlist: Netlist, globals_, flat_node: str) -> list[str]:
    """The labels of the behavioural E, G and B elements whose expression reads ``flat_node`` through v(...)."""
    readers = []
    scope = flat = None
    for s, e in primitive_elements(netlist, globals_):
        named, _ = expression_references(e)
        if named:
            if s is not scope:
                scope, flat = s, flattener(s, globals_)
            if flat_node in map(flat, named):
                readers.append(s.label(e))
    return readers


def _fed(near: _Neighbourhood, node: str, loads) -> list[Terminal]:
    """The passive terminals among ``loads`` that bring the signal to the node from an active output (within
    _LOCAL_DEPTH passive elements) sooner than they lead on to an active input."""
    fed = []
    for t in loads:
        if t.element.kind in _PASSIVE_PATH:
            to_out, to_in = _signal_distances(near, node, t)
            if to_out <= to_in and to_out < float("inf"):
                fed.append(t)
    return fed


def fed_terminals(netlist: Netlist, scope: Scope, node: str, terminals: tuple[Terminal, ...], ac_ground, globals_) -> tuple[Terminal, ...]:
    """The passive terminals on ``node`` that bring the signal from an output (the rule for a node no output sits on)."""
    return tuple(_fed(_Neighbourhood(netlist, scope, ac_ground, globals_), node, [t for t in terminals if t.role == "load"]))


def _sentence(drivers, moved, loads, shunt, bridges, how, tied=(), readers=()) -> str:
    """decided_by: one sentence a designer can check against the schematic."""
    if how == "through":
        parts = [f"driver side: {', '.join(t.label for t in drivers)} (no active output sits on the node; these bring the signal "
                 f"through at most {_LOCAL_DEPTH} passive elements from a node that a drain, collector, controlled source or instance "
                 "output drives, sooner than they lead on to an input"
                 + "".join(f"; outside the instance, {t.fed} does" for t in drivers if t.slot < 0 and t.fed) + ")"]
    elif how == "cg":
        parts = [f"driver side: {', '.join(t.label for t in drivers)} (common-gate or cascode devices: their gate is at AC ground, "
                 "and no other output sits on the node)"]
    else:
        parts = [f"driver side: {', '.join(t.label for t in drivers)} (outputs: drain, collector, controlled-source or instance output"
                 + (", or a follower's source/emitter" if any(t.pin in ("s", "e") for t in drivers) else "") + ")"]
    through = [t for t in (*drivers, *loads) if t.via]
    if through:
        parts.append("; ".join(f"{t.label} is a voltage source in series (no AC impedance): it goes with {t.via} on its far side" for t in through))
    for b in bridges:
        if b.side == "driver":
            parts.append(f"with {b.element} ({b.reason})")
    if readers:  # no load terminal: behavioural expressions read the node, and keep reading it on the load side
        parts.append(_read_by(readers))
    else:
        parts.append(f"load side: {', '.join(t.label for t in loads) or 'only elements to AC ground'}")
    for b in bridges:
        if b.side == "load" and b.reason:
            parts.append(f"{b.element} on the load side ({b.reason})")
    for t in tied:
        parts.append(f"{t.label} goes with {t.tied}: its element has another terminal beyond that source, which has no AC "
                     "impedance, so it is one unit across it" + (_across_note(t.element) if t.role == "shunt" else ""))
    return "; ".join(parts) + _shunt_note(tuple(t for t in shunt if not t.tied)) + "."


def _read_by(readers) -> str:
    """The sentence's part on a load side that only behavioural expressions read."""
    return f"load side: {', '.join(readers)}, whose expression reads the node (it keeps its name, so they read the load side)"


def _switch_like(near: _Neighbourhood, e: Element) -> bool:
    """A transistor (or a device wrapper) whose gate or base is at AC ground: a common-gate device, a cascode or a switch."""
    if e.kind not in _CONTROL and e.kind != "X":
        return False
    pins = _device_pins(near.netlist, near.scope, e)
    control = _CONTROL.get(e.kind) or ("g" if "g" in pins else "b" if "b" in pins and "c" in pins else "")
    if e.kind == "X":
        definition = find_definition(near.netlist, near.scope.definitions, e.model or "")
        if definition is None or not is_device_subcircuit(definition):
            return False
    return control in pins and pins.index(control) < len(e.nodes) and near.grounded(e.nodes[pins.index(control)])


def _signal_distances(near: _Neighbourhood, node: str, t: Terminal) -> tuple[float, float]:
    """How many passive elements (this one included, at most _LOCAL_DEPTH) lead from the node through ``t`` to a node
    with an active output, and to a node with an active input: (to an output, to an input), inf when none. A node
    reached that is a pin of the block the node lies in counts what sits on its net outside the block (a sensing block
    of resistors between an amplifier's outputs and its common-mode node: its outputs drive it from outside)."""
    reach = near.passive_reach(near.other_nodes(t.element, t.slot), node)
    to_out = to_in = float("inf")
    for n in sorted(reach, key=lambda n: (reach[n], n)):
        for role in (*(near.role(e, k, pin) for e, k, pin in near.at.get(n, ()) if e.kind in _ACTIVE and e is not t.element),
                     *_outside_roles(near, n)):
            if role in ("driver", "cg"):
                to_out = min(to_out, reach[n])
            elif role == "load":
                to_in = min(to_in, reach[n])
    return to_out, to_in


def _outside_roles(near: _Neighbourhood, pin: str) -> list[str]:
    """The roles of the active terminals on the net a pin of ``near``'s block is wired to outside it (the block's own
    instance left out), climbing while that net is a pin of the block around it too (at most _THROUGH_DEPTH blocks).
    Only out of a block of R, C and L alone: it has no output of its own, so only what sits outside can feed it; a block
    with devices is judged by what it holds (and a block that holds itself never climbs back to where it was asked)."""
    scope, node, roles = near.scope, pin, []
    if not scope.path or any(e.kind not in _PASSIVE_PATH for e in elements_of(near.netlist, scope)):
        return roles
    for _ in range(_THROUGH_DEPTH):
        if not scope.path or node not in scope.definitions[-1].pins:
            break
        parent = scope_of_path(near.netlist, scope.path[:-1], near.globals_)
        instance = next((e for e in elements_of(near.netlist, parent) if e.key == scope.path[-1]), None) if parent else None
        if instance is None:
            break
        node = instance.nodes[scope.definitions[-1].pins.index(node)]
        outside = _Neighbourhood(near.netlist, parent, near.ac_ground, near.globals_, near.depth + 1)
        roles = [outside.role(e, k, p) for e, k, p in outside.at.get(node, ()) if e.kind in _ACTIVE and e is not instance]
        if roles or outside.grounded(node):
            break
        scope = parent
    return roles


def _across_note(e: Element) -> str:
    """What a one-port across a 0 V source at the node is: a transistor whose terminals sit on its two ends is
    diode-connected; any other element there has no AC voltage across it, so no AC current."""
    return " (diode-connected)" if e.kind in _TRANSISTOR_KINDS else " (no AC voltage across it, so no AC current in it)"


def _shunt_note(shunt: tuple[Terminal, ...]) -> str:
    if not shunt:
        return ""
    oneports = sorted({t.label.rsplit(".", 1)[0] for t in shunt if t.whole})
    grounded = [t.label for t in shunt if t.element.kind != "I"]
    sources = [t.label for t in shunt if t.element.kind == "I"]
    said = [f"{', '.join(grounded)} connect{'s' if len(grounded) == 1 else ''} the node only to AC ground"] if grounded else []
    if sources:
        said.append(f"{', '.join(sources)} {'is an independent current source' if len(sources) == 1 else 'are independent current sources'} "
                    "(no AC current, no AC admittance)")
    note = f"; {' and '.join(said)}, which never changes T; placed on the load side (either side gives the same T)"
    if oneports:
        note += f" ({', '.join(oneports)}: several terminals on the node, a one-port placed whole, e.g. a diode connection)"
    return note
