"""How big a netlist is once its hierarchy is expanded: the number of elements ngspice simulates."""

from __future__ import annotations

from collections.abc import Iterable

from netloop.netlist.model import Element, Netlist, Statement, Subcircuit

__all__ = ["flat_element_count"]


def flat_element_count(netlist: Netlist) -> int:
    """Elements of the expanded circuit: each subcircuit instance counts its definition's elements
    (recursively); an instance of a definition not in the netlist, or one that includes itself, counts 1.

    Definitions are looked up by name wherever they are nested (ngspice's scoping is not modelled:
    this is a size, not a netlist); it costs one pass over the statements.
    """
    definitions: dict[str, Subcircuit] = {}
    _collect(netlist.statements, definitions)
    sizes: dict[str, int] = {}

    def size_of(name: str | None, visiting: frozenset[str]) -> int:
        if name is None or name not in definitions or name in visiting:
            return 1
        if name not in sizes:
            sizes[name] = _count(definitions[name].body, lambda n: size_of(n, visiting | {name}))
        return sizes[name]

    return _count(netlist.statements, lambda n: size_of(n, frozenset()))


def _collect(statements: Iterable[Statement], into: dict[str, Subcircuit]) -> None:
    for s in statements:
        if isinstance(s, Subcircuit):
            into.setdefault(s.name, s)
            _collect(s.body, into)


def _count(statements: Iterable[Statement], instance_size) -> int:
    total = 0
    for s in statements:
        if isinstance(s, Element):
            total += instance_size(s.model) if s.name[:1].lower() == "x" else 1
    return total
