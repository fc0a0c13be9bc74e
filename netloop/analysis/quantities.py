"""Numbers with units as an engineer writes them in requirements, options and plans: 100MHz, 10ns, 3dB, 45deg.

A netlist follows SPICE, where M is milli and anything after the scale letter is ignored; what a
user writes to netloop itself (``--require``, ``--fmin``/``--fmax``, a plan's ``require`` and
``[sweep]``) follows what an engineer means instead:

    NUMBER [MULTIPLIER] [UNIT]        spaces allowed between the parts

    UNIT        the quantity's own unit word, any case: Hz (frequency), s (time), dB, deg;
                another quantity's unit is refused ("fc>=10ns": a time, not a frequency)
    MULTIPLIER  T G meg k m u (or µ) n p f, read as SI: k, K = 1e3; G, g = 1e9; T, t = 1e12;
                meg in any case = 1e6; u, U, µ = 1e-6; n, N = 1e-9; p, P = 1e-12; f = 1e-15;
                m = 1e-3 and, before a unit word, M = 1e6 (100MHz, 1ms). Only for Hz, s and plain
                numbers: a value in dB or deg is a plain number (3dB, 45deg).
    refused     a bare M with no unit (SPICE reads milli, SI mega): write meg or MHz, or m;
                m before a lower-case hz (100mhz: millihertz by SI, megahertz by habit): write
                MHz or meg for mega hertz, mHz for milli hertz.

Every refusal is a PlanError whose message says what was expected; the caller adds where.
"""

from __future__ import annotations

import math
import re

from netloop.errors import PlanError

__all__ = ["UNITS", "parse_quantity"]

UNITS: dict[str, str] = {"hz": "Hz", "s": "s", "db": "dB", "deg": "deg", "": ""}
"""The unit keys netloop's quantities use (lower case) and how each is written."""

_KIND = {"hz": "a frequency", "s": "a time", "db": "a level in dB", "deg": "an angle", "": "a plain number"}
_SCALED = ("hz", "s", "")  # units that take a multiplier
_NUMBER = re.compile(r"\s*(?P<num>[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(?P<tail>.*?)\s*$", re.S)
_MULTIPLIERS = {"T": 1e12, "t": 1e12, "G": 1e9, "g": 1e9, "k": 1e3, "K": 1e3, "m": 1e-3, "u": 1e-6, "U": 1e-6,
                "\u00b5": 1e-6, "\u03bc": 1e-6, "n": 1e-9, "N": 1e-9, "p": 1e-12, "P": 1e-12, "f": 1e-15, "": 1.0}


def _example(unit: str) -> str:
    return {"hz": "1k, 10meg, 100MHz or 2.5GHz", "s": "1n, 10ns or 2us", "db": "3 or 3dB", "deg": "45 or 45deg",
            "": "0.5 or 2"}[unit]


def _split_unit(tail: str) -> tuple[str, str | None]:
    """(multiplier text, unit key) for a tail such as "MHz" -> ("M", "hz"); unit None when no unit word ends it."""
    low = tail.lower()
    for key in ("deg", "db", "hz", "s"):
        if low.endswith(key):
            return tail[: len(tail) - len(key)].rstrip(), key
    return tail, None


def parse_quantity(text: str, unit: str) -> float:
    """The value of ``text`` in ``unit`` (a key of UNITS) by the rules in the module docstring; PlanError otherwise."""
    m = _NUMBER.fullmatch(str(text))
    if m is None:
        raise PlanError(f"{text!r} is not a number; expected {_KIND[unit]} such as {_example(unit)}")
    number, tail = float(m["num"]), m["tail"]
    scale_text, found = _split_unit(tail)
    if found is not None and found != unit:
        raise PlanError(f"{text!r} is {_KIND[found]} ({UNITS[found]}), but {_KIND[unit]} is expected here, such as {_example(unit)}")
    if scale_text.lower() == "meg":
        scale = 1e6
    elif scale_text == "M":
        if found is None:
            better = f"{m['num']}meg or {m['num']}M{UNITS[unit]}" if unit in ("hz", "s") else f"{m['num']}meg"
            raise PlanError(f"{text!r} is ambiguous: SPICE reads M as milli, SI as mega; write {better} for mega, "
                            f"or {m['num']}m for milli")
        scale = 1e6
    elif scale_text in _MULTIPLIERS:
        scale = _MULTIPLIERS[scale_text]
        if scale_text == "m" and found == "hz" and tail[-2:] == "hz":
            raise PlanError(f"{text!r} is ambiguous: mhz is milli hertz by SI but often meant as mega hertz; write "
                            f"{m['num']}MHz (or {m['num']}meg) for mega hertz, {m['num']}mHz for milli hertz")
    else:
        raise PlanError(f"{text!r}: {tail!r} is not a multiplier or unit for {_KIND[unit]}; expected a number such as "
                        f"{_example(unit)} (multipliers T G meg k m u n p f)")
    if scale != 1.0 and unit not in _SCALED:
        raise PlanError(f"{text!r}: a value in {UNITS[unit]} is a plain number, without a multiplier; such as {_example(unit)}")
    value = number * scale
    if not math.isfinite(value):
        raise PlanError(f"{text!r} is not a finite number")
    return value
