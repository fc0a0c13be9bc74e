"""break_loop: split a node into a driver side and a load side and insert the two-run probe between them."""

from __future__ import annotations

import functools

from collections.abc import Callable, Iterator
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
from netloop.probe.scope import GROUND_NAMES, Scope, child_scope, elements_of, resolve_node, scope_names, walk_scopes
from netloop.probe.sides import Split, Terminal, ac_ground_nodes, decide_sides, terminals_at
from netloop.probe.silence import silence_statements

__all__ = ["break_loop", "locate_split", "split_loop"]

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


def break_loop(netlist: Netlist, at: str, *, driver: str | None = None) -> ProbedNetlist:
    """Split node ``at`` into a driver side a and a load side b and insert the probe; the input is not modified.

    ``driver="ELEMENT[.PIN],..."`` chooses the driver side; by default it is decided from the circuit
    (``decided_by`` says how). Raises UnknownNodeError for a node the netlist lacks and ProbeError
    for ground, a supply, a node with one connection, no driver, or a node on no loop.
    """
    _, check = split_loop(netlist, at, driver=driver)
    return check()


def split_loop(netlist: Netlist, at: str, *, driver: str | None = None) -> tuple[ProbedNetlist, Callable[[], ProbedNetlist]]:
    """break_loop in two steps: the probed netlist at once, and ``check()`` for the loop search.

    The first element is ready to simulate but carries no warnings; ``check()`` returns what
    break_loop returns (the same record with the loop warnings) or raises break_loop's ProbeError
    for a node on no loop; it searches once, and a later call gives the same record at once. A caller may simulate while it checks, and must drop its results when
    ``check()`` raises. Errors found before the split are raised at once, as break_loop raises them.
    """
    with gc_paused():  # the passes below build hundreds of thousands of acyclic records for a large netlist
        with _located(netlist):
            probed, check = _break(netlist, at, driver)

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


def locate_split(netlist: Netlist, at: str, *, driver: str | None = None, ac_ground: frozenset[str] | None = None) -> tuple[Scope, str, Split]:
    """Where break_loop splits node ``at`` and how: (its scope, its name there, the split into sides).

    Raises break_loop's refusals (unknown node, AC ground or a supply, one connection, no driver).
    Loop discovery calls it to state what a break would open without building the netlist.
    ``ac_ground`` (netloop.probe.sides.ac_ground_nodes of the netlist) may be given to save a pass.
    """
    given = at.strip().lower()
    globals_ = frozenset(netlist.globals)
    scope, node = resolve_node(netlist, given, globals_)
    if ac_ground is None:
        ac_ground = ac_ground_nodes(netlist, globals_)
    flat = scope.flat(node, globals_)
    if flat in ac_ground:
        raise ProbeError(f"cannot break node {given}: {_tied_by(netlist, flat, globals_)}, so it is AC ground or a supply, not a loop node")
    terminals = terminals_at(netlist, scope, node, ac_ground, globals_)
    scope, node, terminals = _into_instance(netlist, scope, node, terminals, ac_ground, globals_)
    if len(terminals) < 2:
        which = terminals[0].label if terminals else "nothing"
        raise ProbeError(f"cannot break node {given}: it has one connection ({which}), so no loop passes through it")
    return scope, node, decide_sides(netlist, scope, node, terminals, driver, ac_ground, globals_)


def _break(netlist: Netlist, at: str, driver: str | None) -> tuple[ProbedNetlist, Callable[[], ProbedNetlist]]:
    given = at.strip().lower()
    globals_ = frozenset(netlist.globals)
    ac_ground = ac_ground_nodes(netlist, globals_)
    scope, node, split = locate_split(netlist, given, driver=driver, ac_ground=ac_ground)

    local_nodes, element_keys = scope_names(netlist, scope)
    node_a = fresh_name(node + DRIVE_SUFFIX, set(local_nodes))
    names = set(element_keys)
    series = fresh_name(SERIES_NAME, names)
    shunt = fresh_name(SHUNT_NAME, names)
    first = split.driver[0].element.location
    probe = _probe_elements(series, shunt, node_a, node, first)
    moves = {(t.element.key, t.slot): node_a for t in split.driver}
    rewrite = split_node(netlist.statements, scope, moves, probe, _subckt_names(netlist.statements))

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
