"""A knob's new value written into a copy of the netlist: the card the designer would edit, one instance only."""

from __future__ import annotations

from dataclasses import replace

from netloop.errors import NetloopError
from netloop.jobs.sensitivity.knobs import Knob
from netloop.netlist import Netlist, Subcircuit, parse_value
from netloop.netlist.model import Directive, Element
from netloop.probe.rewrite import replace_elements
from netloop.probe.scope import Scope, primitive_elements

__all__ = ["SCALE_PARAM", "changed_card", "changed_netlist", "scaled_netlist"]

SCALE_PARAM = "netloop_knob_scale"
"""The top-level parameter a copy made by scaled_netlist multiplies its knob's value by."""


def _number(value: float) -> str:
    return repr(float(value))


def _scaled(text: str, factor: float | str) -> str:
    """A value token multiplied by ``factor``: a plain number stays a plain number, an expression
    (``{cc}``, ``'2*w'``) becomes ``{(cc)*factor}`` for ngspice to evaluate as it evaluated the original;
    a ``factor`` given as a parameter's name always makes an expression (``{(40)*netloop_knob_scale}``)."""
    stripped = text.strip()
    if isinstance(factor, float | int):
        try:
            return _number(parse_value(stripped) * factor)
        except NetloopError:
            pass
    inner = stripped[1:-1] if stripped[:1] + stripped[-1:] in ("{}", "''") else stripped
    return f"{{({inner})*{factor if isinstance(factor, str) else _number(factor)}}}"


def changed_card(element: Element, knob: Knob, factor: float | str, loaded_value: float) -> Element:
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


def changed_netlist(netlist: Netlist, knob: Knob, factor: float | str, loaded_value: float) -> tuple[Netlist, str]:
    """A new netlist whose knob is ``factor`` times its value, and the changed card as text; inside an
    instance the subcircuit is copied for that instance (as the probe copies it), so other instances
    keep theirs. The input is not modified."""
    for scope, element in primitive_elements(netlist, frozenset(netlist.globals)):
        if scope.flat_element(element) == knob.device:
            card = changed_card(element, knob, factor, loaded_value)
            return _with(netlist, scope, element, card), card.card()
    raise NetloopError(f"{knob.element} is not in the netlist {netlist.source}")


def scaled_netlist(netlist: Netlist, knob: Knob, scale: float) -> Netlist:
    """A copy whose knob's card multiplies its value by the parameter SCALE_PARAM, set to ``scale`` by a ``.param``
    line ahead of the netlist: copies for several values differ in that line only, so ngspice can take the
    next value in place (``alterparam`` and ``reset``: the held copy evaluated and set up again, without
    reading its files) with the results of a fresh load (netloop.sim.Change, kind "param")."""
    if any(isinstance(s, Directive) and s.keyword == ".param" and SCALE_PARAM in s.text.lower() for s in netlist.statements):
        raise NetloopError(f"the netlist {netlist.source} already sets {SCALE_PARAM}, the name netloop gives a knob's scale")
    changed, _card = changed_netlist(netlist, knob, SCALE_PARAM, 1.0)
    line = Directive(".param", f".param {SCALE_PARAM}={scale!r}", knob.location)
    return replace(changed, statements=(line, *changed.statements), _index={})


def _with(netlist: Netlist, scope: Scope, old: Element, new: Element) -> Netlist:
    rewrite = replace_elements(netlist.statements, scope, {old.key: new}, _taken(netlist.statements))
    return replace(netlist, statements=rewrite.statements, _index={})
