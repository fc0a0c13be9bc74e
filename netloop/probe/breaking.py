"""break_loop: split a node into a driver side and a load side and insert the two-run probe between them."""

from __future__ import annotations

import functools

from collections.abc import Callable, Iterator, Mapping
from contextlib import contextmanager
from dataclasses import replace

from netloop.errors import ProbeError, UnknownNodeError, in_netlist
from netloop.netlist.location import SourceLocation
from netloop.netlist.model import Element, Netlist, Subcircuit
from netloop.netlist.devices import is_device_subcircuit
from netloop.netlist.reader import gc_paused
from netloop.probe.loops import connectivity, loop_report
from netloop.probe.records import ProbedNetlist, ProbeVectors
from netloop.probe.rewrite import fresh_name, split_node
from netloop.probe.scope import GROUND_NAMES, Scope, child_scope, elements_of, resolve_node, scope_names, scope_of_path, walk_scopes
from netloop.probe.sides import PIN_ELEMENT, Split, Terminal, ac_ground_nodes, decide_sides, fed_terminals, terminals_at
from netloop.probe.silence import silence_statements

__all__ = ["Located", "break_loop", "locate_split", "split_loop"]

Located = tuple[Scope, str, Split]
"""Where and how a node is split: locate_split's answer."""


SERIES_NAME = "vnl_series"
SHUNT_NAME = "inl_shunt"
DRIVE_SUFFIX = "_drive"


def _subckt_names(statements) -> set[str]:
    names: set[str] = set()
    for s in statements:
        if isinstance(s, Subcircuit):
            names.add(s.name)
            names |= _subckt_names(s.body)
    return names


def _probe_elements(series: str, shunt: str, node_a: str, node_b: str, where: SourceLocation) -> tuple[Element, Element]:
    # v_b - v_a = v_s: + on the load side. The shunt pushes current from ground through itself into a.
    v = Element(series, (node_b, node_a, "dc", "0", "ac", "0"), (0, 1), ("p", "n"), where)
    i = Element(shunt, ("0", node_a, "dc", "0", "ac", "0"), (0, 1), ("p", "n"), where)
    return v, i


def _tied_by(netlist: Netlist, flat: str, globals_: frozenset[str]) -> str:
    if flat in GROUND_NAMES:
        return "it is ground"
    if flat in globals_:
        return "it is a .global net"
    for scope in walk_scopes(netlist, globals_):
        for e in elements_of(netlist, scope):
            if e.kind == "V" and flat in (scope.flat(n, globals_) for n in e.nodes):
                return f"it is tied to ground by the independent voltage source {scope.label(e)}"
    return "it is tied to ground by independent voltage sources"


def break_loop(netlist: Netlist, at: str, *, driver: str | None = None, placement: Mapping[str, str] | None = None) -> ProbedNetlist:
    """Split node ``at`` into a driver side a and a load side b and insert the probe; the input is not modified.

    ``driver="ELEMENT[.PIN],..."`` chooses the driver side; by default it is decided from the circuit
    (``decided_by`` says how, netloop.probe.sides the rules). ``placement`` puts named bridging
    elements on the "driver" or "load" side ({"cc": "load"}) and leaves the rest to the rules.
    Raises UnknownNodeError for a node the netlist lacks and ProbeError for ground, a supply, a
    node with one connection, no driver, or a node on no loop.
    """
    _, check = split_loop(netlist, at, driver=driver, placement=placement)
    return check()


def split_loop(netlist: Netlist, at: str, *, driver: str | None = None, placement: Mapping[str, str] | None = None,
               decided: Located | None = None) -> tuple[ProbedNetlist, Callable[[], ProbedNetlist]]:
    """break_loop in two steps: the probed netlist at once, and ``check()`` for the loop search.

    The first element is ready to simulate but carries no warnings; ``check()`` returns what
    break_loop returns (the same record with the loop warnings) or raises break_loop's ProbeError
    for a node on no loop; it searches once, and a later call gives the same record at once. A caller may simulate while it checks, and must drop its results when
    ``check()`` raises. Errors found before the split are raised at once, as break_loop raises them.
    ``decided`` (locate_split's answer on another netlist with the same instance paths, such as the
    original of a netlist that already holds one probe) is applied instead of deciding here.
    """
    with gc_paused():  # the passes below build hundreds of thousands of acyclic records for a large netlist
        with _located(netlist):
            probed, check = _break(netlist, at, driver, placement, decided)

    @functools.cache  # the search runs once; later calls give its outcome again
    def checked() -> ProbedNetlist:
        with gc_paused(), _located(netlist):
            return check()

    return probed, checked


@contextmanager
def _located(netlist: Netlist) -> Iterator[None]:
    """Re-raise the probe's refusals saying which netlist they concern."""
    try:
        yield
    except (ProbeError, UnknownNodeError) as exc:
        located = in_netlist(exc, netlist.source)
        if located is exc:
            raise
        raise located from exc


def _into_instance(netlist: Netlist, scope: Scope, node: str, terminals: tuple[Terminal, ...], ac_ground, globals_) -> tuple:
    """A net whose only connection in its scope is one instance's pin is broken inside that instance, on
    the pin's net there (and deeper while that holds): its loop closes inside. Else nothing changes."""
    while len(terminals) == 1 and terminals[0].element.kind == "X":
        child = child_scope(netlist, scope, terminals[0].element, globals_)
        if child is None or is_device_subcircuit(child.definitions[-1]):
            break
        inner = child.definitions[-1].pins[terminals[0].slot]
        inside = terminals_at(netlist, child, inner, ac_ground, globals_)
        if not inside:
            break
        scope, node, terminals = child, inner, inside
    return scope, node, terminals


def _outside(netlist: Netlist, scope: Scope, node: str, ac_ground, globals_, inside_drives: bool = False) -> Terminal | None:
    """For a node inside an instance that is one of its pins: the rest of the net outside the instance, as one terminal
    (PIN_ELEMENT) whose role is that of what sits out there, at every level up: a driver when anything drives it, unless
    the instance drives the net itself (``inside_drives``) and inputs sit out there too: the rest of the net is then
    where the signal goes on, a load (an output out there, such as a start-up device beside the block, is one more
    source of current into the node, which cannot leave the net's loads behind on the driver side). None for any other
    node, or when nothing outside connects to the pin."""
    if not scope.path or node not in scope.definitions[-1].pins:
        return None
    roles: list[str] = []
    labels: list[str] = []
    fed: list[str] = []
    inner, net = scope, node
    while inner.path and net in inner.definitions[-1].pins:
        parent = scope_of_path(netlist, inner.path[:-1], globals_)
        instance = next(e for e in elements_of(netlist, parent) if e.key == inner.path[-1] and e.kind == "X")
        slots = [k for k, pin in enumerate(inner.definitions[-1].pins) if pin == net]
        net = instance.nodes[slots[0]]
        outside = [t for t in terminals_at(netlist, parent, net, ac_ground, globals_) if not (t.element is instance and t.slot in slots)]
        roles.extend(t.role for t in outside)
        labels.extend(t.label for t in outside)
        fed.extend(t.label for t in fed_terminals(netlist, parent, net, tuple(outside), ac_ground, globals_))
        inner = parent
    if not labels:
        return None
    loads_too = inside_drives and "load" in roles
    role = ("driver" if "driver" in roles and not loads_too else "cg" if "cg" in roles and not loads_too
            else "shunt" if set(roles) == {"shunt"} else "load")
    shown = ", ".join(labels[:3]) + (f" and {len(labels) - 3} more" if len(labels) > 3 else "")
    return Terminal(PIN_ELEMENT, -1, node, role, f"{'.'.join((*scope.path, node))} outside {scope.path[-1]} ({shown})",
                    fed=", ".join(fed) if role == "load" else "")


def _scope_of_driver(netlist: Netlist, scope: Scope, node: str, driver: str, globals_) -> tuple[Scope, str]:
    """Where a driver= naming terminals deeper in the hierarchy than the node (``x1.x2.m3.d``) puts the break: inside
    that instance, on the net those terminals sit on (the same net as the node). Else (scope, node) unchanged."""
    flat = scope.flat(node, globals_)
    found: set[tuple[tuple[str, ...], str]] = set()
    for spec in (s.strip().lower() for s in driver.split(",") if s.strip()):
        parts = spec.split(".")
        depth = 0
        while depth < len(parts) - 1 and scope_of_path(netlist, tuple(parts[:depth + 1]), globals_) is not None:
            depth += 1
        path = tuple(parts[:depth])
        if len(path) <= len(scope.path) or path[:len(scope.path)] != scope.path:
            return scope, node
        inner = scope_of_path(netlist, path, globals_)
        element = next((e for e in elements_of(netlist, inner) if e.key == parts[depth]), None)
        if element is None and depth == len(parts) - 1 and len(path) > len(scope.path) + 1:
            # INSTANCE.PIN, as netloop labels an instance's terminal (xo.xs.out: the pin out of xs, inside xo)
            path = path[:-1]
            inner = scope_of_path(netlist, path, globals_)
            element = next((e for e in elements_of(netlist, inner) if e.key == parts[depth - 1]), None)
        if element is None:
            return scope, node
        nets = {n for n in element.nodes if inner.flat(n, globals_) == flat}
        if len(nets) != 1:
            raise ProbeError(f"driver {spec!r} is not on node {'.'.join((*scope.path, node))}: none of {'.'.join(path)}.{element.key}'s "
                             f"terminals sits on that net")
        found.add((path, nets.pop()))
    if len(found) > 1:
        raise ProbeError(f"driver={driver!r} names terminals in different instances ({', '.join(sorted('.'.join(p) for p, _ in found))}); "
                         "name the drivers of one instance, and netloop breaks the net inside it")
    if not found:
        return scope, node
    path, local = found.pop()
    return scope_of_path(netlist, path, globals_), local


def locate_split(netlist: Netlist, at: str, *, driver: str | None = None, ac_ground: frozenset[str] | None = None,
                 placement: Mapping[str, str] | None = None) -> tuple[Scope, str, Split]:
    """Where break_loop splits node ``at`` and how: (its scope, its name there, the split into sides).

    Raises break_loop's refusals (unknown node, AC ground or a supply, one connection, no driver).
    Loop discovery calls it to state what a break would open without building the netlist.
    ``ac_ground`` (netloop.probe.sides.ac_ground_nodes of the netlist) may be given to save a pass.
    """
    given = at.strip().lower()
    globals_ = frozenset(netlist.globals)
    scope, node = resolve_node(netlist, given, globals_, lift=False)
    if ac_ground is None:
        ac_ground = ac_ground_nodes(netlist, globals_)
    flat = scope.flat(node, globals_)
    if flat in ac_ground:
        raise ProbeError(f"cannot break node {given}: {_tied_by(netlist, flat, globals_)}, so it is AC ground or a supply, not a loop node")
    if driver is not None:
        scope, node = _scope_of_driver(netlist, scope, node, driver, globals_)
    terminals = terminals_at(netlist, scope, node, ac_ground, globals_)
    outside = _outside(netlist, scope, node, ac_ground, globals_, any(t.role == "driver" for t in terminals))
    if outside is not None:
        terminals = (*terminals, outside)
    else:
        scope, node, terminals = _into_instance(netlist, scope, node, terminals, ac_ground, globals_)
    if len(terminals) < 2:
        which = terminals[0].label if terminals else "nothing"
        raise ProbeError(f"cannot break node {given}: it has one connection ({which}), so no loop passes through it")
    return scope, node, decide_sides(netlist, scope, node, terminals, driver, ac_ground, globals_, placement)


def _break(netlist: Netlist, at: str, driver: str | None, placement: Mapping[str, str] | None,
           decided: Located | None) -> tuple[ProbedNetlist, Callable[[], ProbedNetlist]]:
    given = at.strip().lower()
    globals_ = frozenset(netlist.globals)
    ac_ground = ac_ground_nodes(netlist, globals_)
    if decided is None:
        scope, node, split = locate_split(netlist, given, driver=driver, ac_ground=ac_ground, placement=placement)
    else:
        path, node, split = decided[0].path, decided[1], decided[2]
        scope = scope_of_path(netlist, path, globals_)

    local_nodes, element_keys = scope_names(netlist, scope)
    node_a = fresh_name(node + DRIVE_SUFFIX, set(local_nodes))
    names = set(element_keys)
    series = fresh_name(SERIES_NAME, names)
    shunt = fresh_name(SHUNT_NAME, names)
    first = next(t.element.location for t in (*split.driver, *split.load, *split.shunt) if t.slot >= 0)
    probe = _probe_elements(series, shunt, node_a, node, first)
    moves = {(t.element.key, t.slot): node_a for t in split.driver if t.slot >= 0}
    pin = (node, node_a) if any(t.slot < 0 for t in split.driver) else None  # the net outside goes with the driver side
    rewrite = split_node(netlist.statements, scope, moves, probe, _subckt_names(netlist.statements), pin)

    statements, hits = silence_statements(rewrite.statements, frozenset())
    new = replace(netlist, statements=statements, _index={})

    # flattened names in the new netlist: the copied path keeps its instance names
    new_scope = next(s for s in walk_scopes(new, globals_) if s.path == scope.path)
    side_a, side_b = new_scope.flat(node_a, globals_), new_scope.flat(node, globals_)
    probe_labels = frozenset(new_scope.label(e) for e in probe)
    silenced = []
    hit_set = set(hits)
    for s in walk_scopes(new, globals_) if hit_set else ():
        container = s.definitions[-1].name if s.definitions else ""
        keys = {key for where, key in hit_set if where == container}
        for e in elements_of(new, s) if keys else ():
            if e.name.lower() in keys:  # e.key
                silenced.append(s.flat_element(e))
    vectors = ProbeVectors(
        va=f"v({side_a})",
        vb=f"v({side_b})",
        i_series=f"i({new_scope.flat_element(probe[0])})",
        node_a=side_a,
        node_b=side_b,
        branch=f"{new_scope.flat_element(probe[0])}#branch",
    )
    probed = ProbedNetlist(
        netlist=new,
        node=given,
        side_a=side_a,
        side_b=side_b,
        series_source=new_scope.flat_element(probe[0]),
        shunt_source=new_scope.flat_element(probe[1]),
        vectors=vectors,
        driver_terminals=tuple(t.label for t in split.driver),
        load_terminals=tuple(t.label for t in split.load),
        shunt_terminals=tuple(t.label for t in split.shunt),
        decided_by=split.decided_by,
        silenced_sources=tuple(silenced),
        copied_subcircuits=rewrite.copies,
        bridges=split.bridges,
        inputs_only=split.inputs_only,
        outputs=split.outputs,
        load_readers=split.readers,
    )

    def check() -> ProbedNetlist:
        graph = connectivity(new, globals_, ac_ground, probe_labels)
        on_loop, loops, others = loop_report(graph, side_a, side_b)
        if not on_loop:
            raise ProbeError(
                f"node {given} is not on any loop: after the split no path leads from its load side "
                f"({', '.join(t.label for t in split.load)}) back to its driver side ({', '.join(t.label for t in split.driver)}) "
                "without passing through ground or a supply"
            )
        warnings = []
        if len(loops) > 1:
            warnings.append(
                f"node {given} feeds {len(loops)} loops through its load side ({', '.join(loops)}): the break measures them "
                "together, and which terminals sit on the driver side changes T; choose with driver="
            )
        if others:
            warnings.append(
                f"the load side of {given} also feeds other circuits that do not return to the driver ({', '.join(others)}), "
                "e.g. a bias node shared by several amplifiers: their loading is included, and the split changes T; choose with driver="
            )
        return replace(probed, warnings=tuple(warnings))

    return probed, check
