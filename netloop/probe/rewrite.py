"""Split a node and insert the probe sources (or replace elements), copying the subcircuit definitions on the path of one instance."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, replace

from netloop.netlist.model import Element, Statement, Subcircuit
from netloop.probe.scope import Scope

__all__ = ["Rewrite", "fresh_name", "replace_elements", "split_node"]


@dataclass(frozen=True, slots=True)
class Rewrite:
    statements: tuple[Statement, ...]
    copies: tuple[tuple[str, str], ...]  # (original subcircuit, its copy for this instance)


def fresh_name(base: str, taken: set[str]) -> str:
    """``base`` or ``base_2``, ``base_3``... whichever is not taken; the result is added to ``taken``."""
    name, k = base, 1
    while name in taken:
        k += 1
        name = f"{base}_{k}"
    taken.add(name)
    return name


def _with_model(e: Element, model: str) -> Element:
    """An X line pointing at another subcircuit."""
    toks = list(e.tokens)
    at = len(e.node_slots)
    if at >= len(toks) or toks[at].lower() != (e.model or "").lower():
        at = next(i for i, t in enumerate(toks) if t.lower() == (e.model or "").lower() and i >= len(e.node_slots))
    toks[at] = model
    return replace(e, tokens=tuple(toks), model=model)


def _split_body(body: tuple[Statement, ...], moves: dict[tuple[str, int], str], probe: tuple[Element, ...]) -> tuple[Statement, ...]:
    """Move the chosen (element, slot) terminals to the new node and add the probe after the last element."""
    out = list(body)
    slots_of: dict[str, list[int]] = {}
    for key, k in moves:
        slots_of.setdefault(key, []).append(k)
    last = -1
    for i, s in enumerate(out):  # one pass over a body that may hold a million elements: keep it lean
        if type(s) is Element:
            last = i
            slots = slots_of.get(s.name.lower())  # s.key
            if slots:
                nodes = list(s.nodes)
                for k in slots:
                    nodes[k] = moves[(s.key, k)]
                out[i] = s.with_nodes(tuple(nodes))
    out[last + 1:last + 1] = probe
    return tuple(out)


def _rebody(body: tuple[Statement, ...], instance: str | None, model: str | None, inserts: list[tuple[str, Subcircuit]]) -> tuple[Statement, ...]:
    out: list[Statement] = []
    for s in body:
        if isinstance(s, Element) and instance is not None and s.key == instance:
            s = _with_model(s, model)
        out.append(s)
        if isinstance(s, Subcircuit):
            out.extend(copy for original, copy in inserts if original == s.name)
    return tuple(out)


def split_node(statements: tuple[Statement, ...], scope: Scope, moves: dict[tuple[str, int], str], probe: tuple[Element, ...], taken: set[str],
               pin: tuple[str, str] | None = None) -> Rewrite:
    """New statements: in the node's scope the driver terminals move to the new node and the probe is added.

    Inside an instance, each definition on the instance path is copied under a new name, so that
    other instances of the same subcircuit stay untouched. ``pin`` = (node, new node) renames that
    pin of the innermost definition: the net outside the instance then meets the new node.
    """
    return _rewrite_scope(statements, scope, lambda body: _split_body(body, moves, probe), taken, "broken_in", pin)


def replace_elements(statements: tuple[Statement, ...], scope: Scope, elements: Mapping[str, Element], taken: set[str]) -> Rewrite:
    """New statements with the elements of ``scope`` named in ``elements`` (by key) replaced by their new cards.

    Inside an instance the definitions on its path are copied under new names, as split_node copies
    them, so the change reaches that one instance only.
    """

    def changed(body: tuple[Statement, ...]) -> tuple[Statement, ...]:
        return tuple(elements.get(s.key, s) if isinstance(s, Element) else s for s in body)

    return _rewrite_scope(statements, scope, changed, taken, "changed_in")


def _rewrite_scope(statements: tuple[Statement, ...], scope: Scope, rebody: Callable[[tuple[Statement, ...]], tuple[Statement, ...]],
                   taken: set[str], tag: str, pin: tuple[str, str] | None = None) -> Rewrite:
    """``rebody`` applied to the body of ``scope``: the top-level statements, or a copy of each definition on an instance's path
    (``pin`` = (old, new) renames one pin of the innermost copy)."""
    if not scope.path:
        return Rewrite(rebody(statements), ())
    defs = scope.definitions
    k = len(defs)
    inserts: dict[int, list[tuple[str, Subcircuit]]] = {}  # container level (-1 top) -> copies to add
    copies: list[tuple[str, str]] = []
    new_def: Subcircuit | None = None
    for j in range(k - 1, -1, -1):
        d = defs[j]
        name = fresh_name(f"{d.name}_{tag}_{'_'.join(scope.path[:j + 1])}", taken)
        if j == k - 1:
            body = rebody(d.body)
        else:
            body = d.body
        body = _rebody(body, scope.path[j + 1] if j + 1 < k else None, new_def.name if new_def and j + 1 < k else None, inserts.pop(j, []))
        pins = tuple(pin[1] if pin is not None and j == k - 1 and p == pin[0] else p for p in d.pins)
        new_def = replace(d, name=name, body=body, header="", pins=pins)
        copies.append((d.name, name))
        container = next((m for m in range(j - 1, -1, -1) if d.name in defs[m].subcircuits), -1)
        inserts.setdefault(container, []).append((d.name, new_def))
    top = _rebody(statements, scope.path[0], new_def.name, inserts.pop(-1, []))
    return Rewrite(top, tuple(reversed(copies)))
