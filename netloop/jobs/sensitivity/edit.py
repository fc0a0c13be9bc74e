"""A knob's new value written into a copy of the netlist: the card the designer would edit, one instance only."""

from __future__ import annotations

from dataclasses import replace

from netloop.errors import NetloopError
from netloop.jobs.sensitivity.knobs import Knob
from netloop.netlist import Netlist, Subcircuit, parse_value
from netloop.netlist.model import Element
from netloop.probe.rewrite import replace_elements
from netloop.probe.scope import Scope, primitive_elements

__all__ = ["changed_card", "changed_netlist"]


def _number(value: float) -> str:
    return repr(float(value))


def _scaled(text: str, factor: float) -> str:
    """A value token multiplied by ``factor``: a plain number stays a plain number, an expression
    (``{cc}``, ``'2*w'``) becomes ``{(cc)*factor}`` for ngspice to evaluate as it evaluated the original."""
    stripped = text.strip()
    try:
        return _number(parse_value(stripped) * factor)
    except NetloopError:
        pass
    inner = stripped[1:-1] if stripped[:1] + stripped[-1:] in ("{}", "''") else stripped
    return f"{{({inner})*{_number(factor)}}}"


def changed_card(element: Element, knob: Knob, factor: float, loaded_value: float) -> Element:
    """The element with the knob's value multiplied by ``factor``; a size the card does not write
    (W or L taken from the model) is written as ``w=`` with ngspice's loaded value times ``factor``, and
    one a device wrapper's instance does not write as its parameter with the wrapper's default times ``factor``."""
    tokens = list(element.tokens)
    if knob.token is None and knob.default:
        tokens.append(f"{knob.parameter}={_scaled(knob.default, factor)}")
    elif knob.token is None:
        if element.kind != "M":
            raise NetloopError(f"{element.name} at {element.location.file}:{element.location.line}: the card writes no value to change")
        tokens.append(f"{knob.parameter}={_number(loaded_value * factor)}")
    else:
        old = tokens[knob.token]
        key, eq, value = old.partition("=")
        tokens[knob.token] = f"{key}={_scaled(value, factor)}" if eq else _scaled(old, factor)
    return replace(element, tokens=tuple(tokens))


def _taken(statements) -> set[str]:
    names: set[str] = set()
    for s in statements:
        if isinstance(s, Subcircuit):
            names.add(s.name)
            names |= _taken(s.body)
    return names


def changed_netlist(netlist: Netlist, knob: Knob, factor: float, loaded_value: float) -> tuple[Netlist, str]:
    """A new netlist whose knob is ``factor`` times its value, and the changed card as text; inside an
    instance the subcircuit is copied for that instance (as the probe copies it), so other instances
    keep theirs. The input is not modified."""
    for scope, element in primitive_elements(netlist, frozenset(netlist.globals)):
        if scope.flat_element(element) == knob.device:
            card = changed_card(element, knob, factor, loaded_value)
            return _with(netlist, scope, element, card), card.card()
    raise NetloopError(f"{knob.element} is not in the netlist {netlist.source}")


def _with(netlist: Netlist, scope: Scope, old: Element, new: Element) -> Netlist:
    rewrite = replace_elements(netlist.statements, scope, {old.key: new}, _taken(netlist.statements))
    return replace(netlist, statements=rewrite.statements, _index={})
