"""Where a hierarchical node lives: instance paths, subcircuit look-up and ngspice's flattened names."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass

from netloop.errors import ProbeError, UnknownNodeError
from netloop.netlist.devices import is_device_subcircuit
from netloop.netlist.model import Element, Netlist, Subcircuit

__all__ = ["FlatTerminal", "GROUND_NAMES", "Scope", "flat_terminals", "flattener", "primitive_elements", "resolve_node", "scope_of_path",
           "walk_scopes"]

GROUND_NAMES = frozenset({"0", "gnd"})


@dataclass(frozen=True, slots=True)
class Scope:
    """One place in the hierarchy: the instance path from the top and the definitions it runs through.

    ``path`` is empty at the top level; ``definitions[i]`` is the subcircuit of instance ``path[i]``;
    ``nets`` maps each pin of the innermost definition to its flattened (ngspice) node name.
    """

    path: tuple[str, ...]
    definitions: tuple[Subcircuit, ...]
    nets: tuple[tuple[str, str], ...]

    def flat(self, node: str, globals_: frozenset[str]) -> str:
        """The flattened (ngspice vector) name of a node written in this scope."""
        if node in GROUND_NAMES or node in globals_:
            return node
        for pin, net in self.nets:
            if pin == node:
                return net
        return ".".join((*self.path, node))

    def flat_element(self, element: Element) -> str:
        """ngspice's flattened name of an element in this scope (``m.xamp.m1`` inside instance xamp)."""
        if not self.path:
            return element.key
        return f"{element.key[0]}.{'.'.join(self.path)}.{element.key}"

    def label(self, element: Element) -> str:
        """How a designer names the element: ``m1`` at the top, ``xamp.m1`` inside instance xamp."""
        return ".".join((*self.path, element.key))


@dataclass(frozen=True, slots=True)
class FlatTerminal:
    """One terminal of one element after flattening."""

    scope: Scope
    element: Element
    slot: int  # index into element.node_slots
    pin: str
    node: str  # flattened node name


def find_definition(netlist: Netlist, definitions: tuple[Subcircuit, ...], name: str) -> Subcircuit | None:
    """The subcircuit an X line in a scope refers to: nested definitions first, then the top level."""
    for d in reversed(definitions):
        sub = d.subcircuits.get(name)
        if sub is not None:
            return sub
    return netlist.subcircuits.get(name)


def elements_of(netlist: Netlist, scope: Scope) -> tuple[Element, ...]:
    return scope.definitions[-1].elements if scope.definitions else netlist.elements


def pin_names(element: Element, definition: Subcircuit | None) -> tuple[str, ...]:
    """Pin roles of an element; an X line takes its definition's pin names by position."""
    if element.kind == "X" and definition is not None and len(definition.pins) == len(element.node_slots):
        return definition.pins
    if element.kind == "X" and definition is None and "fet" in (element.model or "") and len(element.node_slots) == 4:
        return ("d", "g", "s", "b")  # a transistor wrapper whose definition is not loaded
    return element.pins


def child_scope(netlist: Netlist, scope: Scope, instance: Element, globals_: frozenset[str]) -> Scope | None:
    """The scope inside an X instance, or None when its definition is not in the netlist."""
    definition = find_definition(netlist, scope.definitions, instance.model or "")
    if definition is None or len(definition.pins) != len(instance.node_slots):
        return None
    nets = tuple((pin, scope.flat(node, globals_)) for pin, node in zip(definition.pins, instance.nodes))
    return Scope((*scope.path, instance.key), (*scope.definitions, definition), nets)


def flattener(scope: Scope, globals_: frozenset[str]) -> Callable[[str], str]:
    """A function giving ``scope.flat(node, globals_)`` for any node, without its per-call set-up."""
    if not scope.path and not scope.nets:
        return _same  # at the top every node keeps its name
    nets: dict[str, str] = {}
    for pin, net in scope.nets:
        nets.setdefault(pin, net)  # the first pin of a name wins, as in Scope.flat
    prefix = ".".join((*scope.path, ""))
    keep = GROUND_NAMES | globals_

    def flat(node: str) -> str:
        if node in keep:
            return node
        net = nets.get(node)
        return prefix + node if net is None else net

    return flat


def _same(node: str) -> str:
    return node


def walk_scopes(netlist: Netlist, globals_: frozenset[str], depth: int = 0, scope: Scope | None = None) -> Iterator[Scope]:
    """Every scope of the flattened circuit, top first, depth first."""
    scope = scope or Scope((), (), ())
    if depth > 64:
        raise ProbeError(f"subcircuit nesting deeper than 64 levels at {'.'.join(scope.path)}: is a subcircuit instantiating itself?")
    yield scope
    for e in elements_of(netlist, scope):
        if e.name[0] in "xX":  # e.kind == "X", without the call: this runs over every element
            child = child_scope(netlist, scope, e, globals_)
            if child is not None and not is_device_subcircuit(child.definitions[-1]):
                yield from walk_scopes(netlist, globals_, depth + 1, child)


def primitive_elements(netlist: Netlist, globals_: frozenset[str]) -> Iterator[tuple[Scope, Element]]:
    """Every primitive element with its scope: the elements whose terminals flat_terminals gives, in the same order."""
    for scope in walk_scopes(netlist, globals_):
        definitions = scope.definitions
        for e in elements_of(netlist, scope):
            if e.name[0] in "xX":
                definition = find_definition(netlist, definitions, e.model or "")
                if definition is not None and not is_device_subcircuit(definition):
                    continue
            yield scope, e


def flat_terminals(netlist: Netlist, globals_: frozenset[str]) -> Iterator[FlatTerminal]:
    """Every terminal of every primitive element (X lines are expanded; unknown subcircuits kept as blocks)."""
    for scope, e in primitive_elements(netlist, globals_):
        definition = find_definition(netlist, scope.definitions, e.model or "") if e.kind == "X" else None
        pins = pin_names(e, definition)
        for k, node in enumerate(e.nodes):
            yield FlatTerminal(scope, e, k, pins[k] if k < len(pins) else str(k + 1), scope.flat(node, globals_))


def scope_names(netlist: Netlist, scope: Scope) -> tuple[frozenset[str], frozenset[str]]:
    """(every local node name, the definition's pins included; every element key) of a scope, in one
    pass, kept on the netlist for the next caller (resolving a node and breaking it both need them)."""
    cache_key = ("scope_names", scope.path, tuple(d.name for d in scope.definitions))
    cached = netlist._index.get(cache_key)
    if cached is not None and cached[0] is netlist.statements:  # a copy made with replace() may share _index
        return cached[1], cached[2]
    nodes: set[str] = set()
    names: set[str] = set()
    add_nodes, add_name = nodes.update, names.add
    for e in elements_of(netlist, scope):
        add_nodes(e.nodes)
        add_name(e.name.lower())  # e.key
    if scope.definitions:
        nodes.update(scope.definitions[-1].pins)
    out = (frozenset(nodes), frozenset(names))
    netlist._index[cache_key] = (netlist.statements, *out)
    return out


def _local_nodes(netlist: Netlist, scope: Scope) -> frozenset[str]:
    return scope_names(netlist, scope)[0]


def resolve_node(netlist: Netlist, at: str, globals_: frozenset[str], *, lift: bool = True) -> tuple[Scope, str]:
    """The scope and local name where a (possibly hierarchical) node really lives.

    With ``lift`` a pin of an instance is the net it is wired to one level up, so ``xamp.out`` with
    ``out`` a pin of xamp's subcircuit resolves to the top-level net on that pin. Without it the name
    stays where it was given (inside xamp, on its pin ``out``): netloop.probe breaks it there.
    """
    name = at.strip().lower()
    top = Scope((), (), ())
    top_nodes = _local_nodes(netlist, top)
    if name in top_nodes or "." not in name:
        if name not in top_nodes:
            raise UnknownNodeError("node", name, _all_flat_nodes(netlist, globals_))
        return top, name
    parts = name.split(".")
    scope = top
    for depth, inst in enumerate(parts[:-1]):
        instance = next((e for e in elements_of(netlist, scope) if e.key == inst and e.kind == "X"), None)
        child = child_scope(netlist, scope, instance, globals_) if instance is not None else None
        if child is None:
            rest = ".".join(parts[depth:])
            if rest in _local_nodes(netlist, scope):  # a node name that itself contains dots
                return _lift(netlist, scope, rest, globals_) if lift else (scope, rest)
            raise UnknownNodeError("node", name, _all_flat_nodes(netlist, globals_))
        scope = child
    local = parts[-1]
    if local not in _local_nodes(netlist, scope):
        raise UnknownNodeError("node", name, _all_flat_nodes(netlist, globals_))
    if not lift and local not in GROUND_NAMES and local not in globals_:
        return scope, local
    return _lift(netlist, scope, local, globals_)


def _lift(netlist: Netlist, scope: Scope, local: str, globals_: frozenset[str]) -> tuple[Scope, str]:
    """Move a pin up to the net it is wired to in the parent scope, as often as needed."""
    while scope.path and scope.definitions and local in scope.definitions[-1].pins:
        parent = Scope(scope.path[:-1], scope.definitions[:-1], ())
        parent = _rebuild(netlist, parent, globals_)
        instance = next(e for e in elements_of(netlist, parent) if e.key == scope.path[-1])
        local = instance.nodes[scope.definitions[-1].pins.index(local)]
        scope = parent
    if local in GROUND_NAMES or local in globals_:
        return Scope((), (), ()), local
    return scope, local


def scope_of_path(netlist: Netlist, path: tuple[str, ...], globals_: frozenset[str]) -> Scope | None:
    """The scope inside the instance path ``path`` (("x1", "x2")), or None when an instance on it is unknown or a device."""
    scope = Scope((), (), ())
    for inst in path:
        instance = next((e for e in elements_of(netlist, scope) if e.key == inst and e.kind == "X"), None)
        child = child_scope(netlist, scope, instance, globals_) if instance is not None else None
        if child is None or is_device_subcircuit(child.definitions[-1]):
            return None
        scope = child
    return scope


def _rebuild(netlist: Netlist, scope: Scope, globals_: frozenset[str]) -> Scope:
    """Recompute a scope's pin nets by walking down its path from the top."""
    current = Scope((), (), ())
    for inst in scope.path:
        instance = next(e for e in elements_of(netlist, current) if e.key == inst)
        current = child_scope(netlist, current, instance, globals_)
    return current


def _all_flat_nodes(netlist: Netlist, globals_: frozenset[str]) -> tuple[str, ...]:
    return tuple(sorted({t.node for t in flat_terminals(netlist, globals_)}))
