"""The values a designer can turn: every passive element, linear controlled-source gain and MOSFET size,
at the top and inside each subcircuit instance, named as the designer and as ngspice name them."""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

from netloop.errors import NetloopError
from netloop.netlist import Element, Netlist, SourceLocation, parse_value
from netloop.netlist.devices import WrapperSize, wrapper_sizes
from netloop.netlist.model import Directive, Subcircuit
from netloop.probe.scope import find_definition, primitive_elements
from netloop.sim import Alter

__all__ = ["Knob", "find_knobs", "select_knobs"]

# element letter -> (ngspice parameter, what it is, SI unit); E/G/F/H only in their linear forms
_VALUES = {
    "R": ("resistance", "resistance", "ohm"),
    "C": ("capacitance", "capacitance", "F"),
    "L": ("inductance", "inductance", "H"),
    "E": ("gain", "voltage gain", "V/V"),
    "G": ("gain", "transconductance", "S"),
    "F": ("gain", "current gain", "A/A"),
    "H": ("gain", "transresistance", "ohm"),
}
_SIZES = (("w", "width", "m"), ("l", "length", "m"), ("m", "multiplier", ""))


@dataclass(frozen=True, slots=True)
class Knob:
    """One value the sensitivity job may change: an element's value or gain, or a transistor's size.

    element      the designer's name of the element: ``cc`` at the top, ``xa1.m3`` inside instance xa1.
    parameter    ngspice's name of the parameter: resistance, capacitance, inductance, gain, w, l, m.
    device       ngspice's flattened name of the element (``c.xa1.cc`` inside xa1): each instance has its own.
    quantity     what it is, in words ("capacitance", "width", "transconductance").
    unit         its SI unit ("F", "ohm", "m", "S", "V/V"; "" for a multiplier).
    token        the index in the element's tokens that holds the value (None: the card does not write it).
    location     where the element is written (inside a subcircuit definition for an instance's element).
    reload       "" for a value ngspice changes on the loaded circuit; else why a change needs the netlist
                 read again (a size of a process device wrapper: the wrapper derives its device's other
                 values from it when ngspice reads the instance), and each change is an edited copy.
    written      for a reloaded knob, its value as the card (or the wrapper's default) gives it, in its
                 SI unit (``.option scale`` applied to a width or length); None when it is no plain number.
    default      for a reloaded knob the card does not write, the wrapper's default as written (``1``).
    """

    element: str
    parameter: str
    device: str
    quantity: str
    unit: str
    token: int | None
    location: SourceLocation
    reload: str = ""
    written: float | None = None
    default: str = ""

    @property
    def name(self) -> str:
        """How commands name the knob: the element for a value or gain, ``element:parameter`` for a size."""
        return self.element if self.parameter in ("resistance", "capacitance", "inductance", "gain") else f"{self.element}:{self.parameter}"

    @property
    def keeps_operating_point(self) -> bool:
        """A capacitor or an inductor carries no DC current or voltage drop: changing it leaves the operating point."""
        return self.parameter in ("capacitance", "inductance")

    @property
    def in_place(self) -> bool:
        """Whether ngspice changes this value on the loaded circuit (else each change is an edited copy of the netlist)."""
        return not self.reload

    def alter(self, scale: float) -> Alter:
        """The simulator's change that multiplies this value by ``scale`` on the loaded circuit."""
        return Alter(self.device, self.parameter, scale)


def _value_token(e: Element) -> int | None:
    """Where an R, C, L card or a linear E, G, F, H card writes its value or gain; None for other forms."""
    kind, toks = e.kind, e.tokens
    if kind in "RCL":
        at = len(e.node_slots)
        if at < len(toks) and "=" not in toks[at]:
            return at
        keys = {"R": ("r", "resistance"), "C": ("c", "capacitance"), "L": ("l", "inductance")}[kind]
        return next((i for i, t in enumerate(toks) if "=" in t and t.partition("=")[0].strip().lower() in keys), None)
    if kind in "EG":
        return 4 if len(e.node_slots) == 4 and e.pins == ("p", "n", "cp", "cn") and len(toks) > 4 else None
    if kind in "FH":
        return 3 if len(toks) > 3 and not toks[2].lower().startswith("poly") and "=" not in toks[3] else None
    return None


def _size_token(e: Element, key: str) -> int | None:
    return next((i for i, t in enumerate(e.tokens) if "=" in t and t.partition("=")[0].strip().lower() == key), None)


def find_knobs(netlist: Netlist) -> tuple[Knob, ...]:
    """Every knob of the netlist, in netlist order, each instance's elements separately.

    Resistors, capacitors and inductors (their value), linear E, G, F, H sources (their gain), and
    MOSFETs (W and L; the multiplier m where the card writes one). For an X instance of a process
    device wrapper (netloop.netlist.devices: one transistor or diode and its models), the wrapper's
    size parameters (wrapper_sizes: those it hands to the device's width, length, fingers or
    multiplier, and device counts its models multiply with them) and ngspice's instance multiplier
    ``m``; these need the netlist read again (Knob.reload). Parameters of ordinary subcircuit
    instances are not knobs (the elements inside each instance are), nor other devices.
    """
    out: list[Knob] = []
    scale = _option_scale(netlist)
    for scope, e in primitive_elements(netlist, frozenset(netlist.globals)):
        kind = e.kind
        if kind in _VALUES and (kind in "RCL" or _value_token(e) is not None):
            parameter, quantity, unit = _VALUES[kind]
            out.append(Knob(scope.label(e), parameter, scope.flat_element(e), quantity, unit, _value_token(e), e.location))
        elif kind == "M":
            for key, quantity, unit in _SIZES:
                token = _size_token(e, key)
                if key == "m" and token is None:
                    continue  # a multiplier only where the card writes one (W covers the rest)
                out.append(Knob(scope.label(e), key, scope.flat_element(e), quantity, unit, token, e.location))
        elif kind == "X":
            wrapper = find_definition(netlist, scope.definitions, e.model or "")
            if wrapper is not None:
                out.extend(_wrapper_knobs(scope.label(e), scope.flat_element(e), e, wrapper, scale))
    return tuple(out)


# a wrapper size's role (the device parameter it sets) -> what it is, SI unit, scaled by .option scale
_ROLES = {"w": ("width", "m", True), "l": ("length", "m", True), "nf": ("fingers", "", False), "m": ("multiplier", "", False),
          "area": ("area factor", "", False), "": ("device count in the models' mismatch terms", "", False)}


def _wrapper_knobs(label: str, device: str, e: Element, wrapper: Subcircuit, scale: float) -> list[Knob]:
    """The sizes of one instance of a device wrapper (wrapper_sizes), and ngspice's own multiplier ``m`` when the card writes it.

    Width and length are knobs always (from the wrapper's default when the card does not write them);
    fingers, multipliers and counts only where the X card writes them, as a MOSFET card's m."""
    sizes = list(wrapper_sizes(wrapper))
    if not any(s.name == "m" for s in sizes):
        sizes.append(WrapperSize("m", "1", "m"))  # ngspice multiplies every element of an instance by m
    why = (f"a size of the device wrapper {wrapper.name}, applied when ngspice reads the instance "
           "(the wrapper derives its device's other values from it): each change is an edited copy of the netlist, read again")
    out = []
    for size in sorted(sizes, key=lambda z: tuple(_ROLES).index(z.role)):
        token = _size_token(e, size.name)
        if token is None and size.role not in ("w", "l"):
            continue
        quantity, unit, scaled = _ROLES[size.role]
        text = e.tokens[token].partition("=")[2] if token is not None else size.default
        try:
            written = float(f"{parse_value(text.strip()) * (scale if scaled else 1.0):.15g}")  # 40 x 1u is 4e-05, not 3.9999999999999996e-05
        except NetloopError:
            written = None  # an expression: the what-if scales it as written, but its value is not known here
        out.append(Knob(label, size.name, device, quantity, unit, token, e.location, why, written, "" if token is not None else size.default))
    return out


def _option_scale(netlist: Netlist) -> float:
    """``.option scale=`` as the netlist sets it (sky130's models: 1u, sizes written in microns), else 1."""
    scale = 1.0
    for s in _directives(netlist.statements):
        if s.keyword in (".option", ".options", ".opt"):
            for word in s.text.split()[1:]:
                key, eq, value = word.partition("=")
                if eq and key.strip().lower() == "scale":
                    try:
                        scale = parse_value(value.strip())
                    except NetloopError:
                        pass
    return scale


def _directives(statements):
    for s in statements:
        if isinstance(s, Directive):
            yield s


def select_knobs(knobs: tuple[Knob, ...], names: Iterable[str]) -> tuple[Knob, ...]:
    """The knobs named (``cc``, ``m6:w``, ``xa1.m3:l``; an element name alone selects all its knobs), in the order given.

    NetloopError naming close matches for a name that is no knob.
    """
    chosen: list[Knob] = []
    for raw in names:
        name = raw.strip().lower()
        hits = [k for k in knobs if k.name == name] or [k for k in knobs if k.element == name]
        if not hits:
            import difflib  # noqa: PLC0415

            close = difflib.get_close_matches(name, sorted({k.name for k in knobs} | {k.element for k in knobs}), n=3)
            hint = f"; did you mean {', '.join(close)}?" if close else ""
            raise NetloopError(f"{raw!r} is not a value netloop can change in this netlist (an R, C, L, a linear E/G/F/H gain, "
                               f"a MOSFET's W, L or m, or a process device wrapper's size, written ELEMENT:w){hint}")
        chosen.extend(k for k in hits if k not in chosen)
    return tuple(chosen)
