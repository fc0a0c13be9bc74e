"""The numeric axes of a corner run (settings whose every value is a number) and the lines of corners along one.

A run's settings come from its records (``settings``: {"param.iload": "10m", "temp": "125", "lib": "ss"}), so a
results file read on its own has the same axes as the run that wrote it. Values are read as the netlist reads
them (SPICE: 10m is 0.01, 1meg is 1e6), because that is what the corner's netlist received.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from netloop.jobs.corners.plan import Setting
from netloop.netlist import parse_value

__all__ = ["KIND_UNITS", "Line", "NumericAxis", "Plane", "lines_along", "numeric_axes", "planes", "setting_label", "setting_number"]

KIND_UNITS = {"temp": "°C", "supply": "V"}
ELEMENT_UNITS = {"r": "Ω", "c": "F", "l": "H"}  # an element setting's unit, by the element's letter
"""The unit of a setting kind's values; a .param's unit is what the plan's [units] table gives, else none."""

LOG_SPAN = 10.0
"""An axis of positive values whose largest is at least this many times its smallest is read on a log scale."""


@dataclass(frozen=True, slots=True)
class NumericAxis:
    """One numeric setting of a run: its key in the records, a short name, a unit and its values, ascending."""

    key: str  # "param.iload", "temp", "supply.vdd"
    name: str  # "iload", "temp", "vdd"
    unit: str  # "A", "°C", "V" or ""
    values: tuple[float, ...]
    log: bool  # read (interpolated, drawn) on a log scale: every value positive, spanning LOG_SPAN or more

    def coordinate(self, value: float) -> float:
        """Where a value sits on this axis for interpolation: log10 of it on a log axis, else itself."""
        return math.log10(value) if self.log else value

    def value_at(self, coordinate: float) -> float:
        """The inverse of ``coordinate``."""
        return 10.0**coordinate if self.log else coordinate


@dataclass(frozen=True, slots=True)
class Line:
    """The corners equal in every setting but one axis (and measured at the same break node), ascending along it."""

    axis: NumericAxis
    at: str
    others: tuple[tuple[str, str], ...]  # the other settings, (key, value as written), in record order
    points: tuple[tuple[float, dict], ...]  # (axis value, record)

    @property
    def context(self) -> str:
        """The other settings as a corner name writes them ("ss/125C"); "" when there are none."""
        return "/".join(setting_label(k, v) for k, v in self.others)


def setting_label(key: str, value: str) -> str:
    """How a setting reads in a corner name: lib "ss", temp "125C", supply "vdd=3.0V", param "cc=0.6p"."""
    kind, _, target = key.partition(".")
    return Setting(kind, target, value).label


def setting_number(text: object) -> float | None:
    """A setting's value as the netlist reads it (SPICE suffixes), or None when it is not a finite number."""
    try:
        value = parse_value(str(text))
    except Exception:  # noqa: BLE001 - parse_value raises NetlistSyntaxError (or ValueError) on a non-number
        return None
    return value if math.isfinite(value) else None


def _name(key: str) -> str:
    kind, _, target = key.partition(".")
    return target or kind


def numeric_axes(records: tuple[dict, ...], units: dict[str, str] | None = None) -> tuple[NumericAxis, ...]:
    """The settings of ``records`` whose every value is a number and that take two values or more, in the order
    the records name them. ``units`` maps a key ("param.iload") or its name ("iload") to a unit ("A")."""
    units = {k.lower(): v for k, v in (units or {}).items()}
    seen: dict[str, set[float] | None] = {}
    for r in records:
        for key, text in (r.get("settings") or {}).items():
            number = setting_number(text)
            if key not in seen:
                seen[key] = set()
            if number is None or seen[key] is None:
                seen[key] = None
            else:
                seen[key].add(number)
    out = []
    for key, values in seen.items():
        if not values or len(values) < 2:
            continue
        ordered = tuple(sorted(values))
        log = ordered[0] > 0 and ordered[-1] / ordered[0] >= LOG_SPAN
        kind = key.partition(".")[0]
        default = ELEMENT_UNITS.get(_name(key)[:1].lower(), "") if kind == "element" else KIND_UNITS.get(kind, "")
        unit = units.get(key.lower(), units.get(_name(key).lower(), default))
        out.append(NumericAxis(key, _name(key), unit, ordered, log))
    return tuple(out)


def lines_along(records: tuple[dict, ...], axis: NumericAxis) -> tuple[Line, ...]:
    """The lines of corners along ``axis``: records with that setting, grouped by break node and every other
    setting, in the order the records first name each group; each line ascending along the axis. Records of any
    outcome are included (an error or inconclusive corner has no figures: netloop.jobs.runs.figures.measured)."""
    groups: dict[tuple, list[tuple[float, dict]]] = {}
    named: dict[tuple, tuple[tuple[str, str], ...]] = {}  # each group's other settings in the order its first record gives
    for r in records:
        settings = r.get("settings") or {}
        if axis.key not in settings:
            continue
        value = setting_number(settings[axis.key])
        if value is None:
            continue
        others = tuple((k, str(v)) for k, v in settings.items() if k != axis.key)
        group = (str(r.get("at") or ""), tuple(sorted(others)))
        named.setdefault(group, others)
        groups.setdefault(group, []).append((value, r))
    lines = [Line(axis, group[0], named[group], tuple(sorted(points, key=lambda p: p[0]))) for group, points in groups.items()]
    return tuple(sorted(lines, key=lambda line: (line.at, _order(line.others))))


def _order(settings: tuple[tuple[str, str], ...]) -> tuple:
    """Sort key of a group's other settings: by key, numbers by value (10m before 100m), then text."""
    key = []
    for k, v in sorted(settings):
        number = setting_number(v)
        key.append((k, 0 if number is not None else 1, number if number is not None else 0.0, v))
    return tuple(key)


@dataclass(frozen=True, slots=True)
class Plane:
    """The corners over two axes with every other setting (and the break node) equal: one line along x per y value."""

    x: NumericAxis
    y: NumericAxis
    at: str
    others: tuple[tuple[str, str], ...]  # the settings besides x and y, in record order
    lines: tuple[Line, ...]  # along x, one per y value (their ``others`` include y)

    @property
    def context(self) -> str:
        """The other settings as a corner name writes them ("ss/125C"); "" when there are none."""
        return "/".join(setting_label(k, v) for k, v in self.others)


def planes(records: tuple[dict, ...], x: NumericAxis, y: NumericAxis) -> tuple[Plane, ...]:
    """The planes of ``records`` over axes x and y: the lines along x grouped by break node and every setting but y."""
    groups: dict[tuple, list[Line]] = {}
    named: dict[tuple, tuple[tuple[str, str], ...]] = {}
    for line in lines_along(records, x):
        rest = tuple((k, v) for k, v in line.others if k != y.key)
        if len(rest) == len(line.others):
            continue  # this line's corners do not set y
        group = (line.at, tuple(sorted(rest)))
        named.setdefault(group, rest)
        groups.setdefault(group, []).append(line)
    found = [Plane(x, y, group[0], named[group], tuple(lines)) for group, lines in groups.items()]
    return tuple(sorted(found, key=lambda plane: (plane.at, _order(plane.others))))
