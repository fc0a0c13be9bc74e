"""Changing a loaded circuit in place (temperature, a source's DC value, a .param, an R, C or L value) instead of reading its netlist again.

A job names the values its netlist holds that ngspice can change in place (SimJob.changes). When the
circuit loaded for an earlier job differs from the new job's netlist only in the lines those changes
explain, and both name the same values, the worker changes them with ngspice's own commands:

- ``.param NAME``: ``alterparam NAME=VALUE`` then ``reset``: ngspice evaluates the netlist's parameter
  expressions again (model cards and instance parameters included) from the netlist it holds, without
  reading any file, and sets the circuit up anew (its matrix orderings too);
- the temperature: ``option temp=VALUE``, the text of the netlist's ``.temp`` line (ngspice reads both alike:
  159 temperatures from -55 to 150 C gave a diode's operating point bit for bit either way);
- a source's DC value: ``alter NAME dc = M * 1eE``, the product ngspice's netlist reader computes
  (netloop.sim.numbers), so the source holds the double a fresh load reads;
- a resistor's, capacitor's or inductor's value: ``alter NAME = M * 1eE`` likewise (ngspice sets its
  temperature-dependent values again before the next analysis, as after a load).

tests/sim/test_in_place.py shows the results equal a fresh load bit for bit.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping

from netloop.sim.job import Change
from netloop.sim.numbers import netlist_product

__all__ = ["change_commands", "explained", "values_of"]

_WORD = re.compile(r"^[a-z0-9_.#:$+-]+$")


def values_of(changes: Iterable[Change]) -> dict[tuple[str, str], str]:
    """{Change.key: value} of ``changes``."""
    return {c.key: c.value.strip() for c in changes}


def _statements(text: str) -> list[str]:
    """The netlist's lines with '+' continuation lines joined to the line they continue, lower-case."""
    out: list[str] = []
    for line in text.lower().splitlines():
        if line.lstrip().startswith("+") and out:
            out[-1] += " " + line.lstrip()[1:]
        else:
            out.append(line)
    return out


_SOURCE_WORDS = frozenset("ac pulse sin exp pwl sffm am trnoise trrandom distof1 distof2 portnum z0".split())
_VALUE = r"\s*=\s*(?:\{[^}]*\}|'[^']*'|\"[^\"]*\"|[^\s,]+)"


def _masked(line: str, keys: set[tuple[str, str]]) -> str:
    """The line with the values the changes set replaced by '*' (a .temp value, a changed source's DC value,
    a changed parameter's value on a .param line); other lines as they are."""
    words = line.split()
    if not words:
        return line
    head = words[0]
    if head == ".temp" and ("temp", "") in keys:
        return ".temp *"
    if head == ".param":
        for kind, name in keys:
            if kind == "param":
                line = re.sub(rf"(?<![\w.]){re.escape(name)}{_VALUE}", f"{name}=*", line)
        return " ".join(line.split())
    if ("element", head) in keys and len(words) > 3:
        words[3] = "*"
        return " ".join(words)
    if ("source", head) in keys and len(words) > 3:
        at = 4 if words[3] == "dc" else 3
        if at < len(words) and (at == 4 or words[3].split("(")[0] not in _SOURCE_WORDS):
            words[at] = "*"
        return " ".join(words)
    return line


def explained(loaded: str, wanted: str, changes: Iterable[Change]) -> bool:
    """True when netlist text ``wanted`` differs from ``loaded`` only in the values ``changes`` set: the
    ``.temp`` value, the DC value of a changed source's card, a changed parameter's value on a ``.param`` line, the
    value of a changed R, C or L card."""
    keys = {c.key for c in changes}
    a, b = _statements(loaded), _statements(wanted)
    return len(a) == len(b) and all(x == y or _masked(x, keys) == _masked(y, keys) for x, y in zip(a, b))


def change_commands(changes: Iterable[Change], current: Mapping[tuple[str, str], str]) -> tuple[list[str], bool]:
    """The ngspice commands that take a loaded circuit whose changeable values are ``current`` to
    ``changes``, and whether they include ``reset`` (which sets the circuit up anew: saves are given again).
    ValueError for a value or name ngspice could not take in place."""
    changes = tuple(changes)
    for c in changes:
        if (c.kind != "temp" and not _WORD.match(c.target.strip().lower())) or not c.value.strip() or any(ch.isspace() for ch in c.value.strip()):
            raise ValueError(f"cannot change {c.target or c.kind!r} to {c.value!r} in place")
    params = [c for c in changes if c.kind == "param" and current.get(c.key) != c.value.strip()]
    commands = [f"alterparam {c.target.strip().lower()}={c.value.strip()}" for c in params]
    reset = bool(params)
    if reset:
        commands.append("reset")  # evaluates the parameters again; the circuit is set up anew from the held netlist
    for c in changes:
        if c.kind == "param" or (not reset and current.get(c.key) == c.value.strip()):
            continue
        if c.kind == "temp":
            commands.append(f"option temp={c.value.strip()}")  # read as the netlist's .temp line is (see module doc)
        elif c.kind == "source":
            commands.append(f"alter {c.target.strip().lower()} dc = {netlist_product(c.value)}")
        elif c.kind == "element":
            commands.append(f"alter {c.target.strip().lower()} = {netlist_product(c.value)}")
        else:
            raise ValueError(f"unknown kind of change {c.kind!r}")
    return commands, reset
