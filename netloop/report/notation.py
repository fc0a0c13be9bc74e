"""Numbers as a designer reads them: engineering notation, degrees and decibels with fixed decimals."""

from __future__ import annotations

import math

from netloop.analysis.response import ratio_db

__all__ = ["NONE", "db", "deg", "eng", "fixed", "number", "prefix_for", "ratio_db", "requirement_value"]

_PREFIXES = ((1e12, "T"), (1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"), (1e-9, "n"), (1e-12, "p"), (1e-15, "f"))
NONE = "-"
"""What every formatter prints for a quantity that does not exist (None)."""


def _special(value: float | None) -> str | None:
    if value is None:
        return NONE
    if math.isnan(value):
        return "nan"
    if math.isinf(value):
        return "inf" if value > 0 else "-inf"
    return None


def eng(value: float | None, unit: str = "", digits: int = 3) -> str:
    """Engineering notation with an SI prefix and `digits` significant figures: eng(1.234e6, "Hz") == "1.23 MHz"."""
    special = _special(value)
    if special is not None:
        return f"{special} {unit}".rstrip() if special != NONE else NONE
    if value == 0:
        return f"0 {unit}".rstrip()
    rounded = float(f"{value:.{digits - 1}e}")  # round first, so 999.96e3 becomes 1.00e6 and reads "1.00 M"
    scale, prefix = prefix_for(rounded)
    scaled = rounded / scale
    decimals = max(digits - 1 - int(math.floor(math.log10(abs(scaled)))), 0)
    text = f"{scaled:.{decimals}f}"
    return f"{text} {prefix}{unit}".rstrip()


def prefix_for(value: float) -> tuple[float, str]:
    """The SI prefix engineering notation writes ``value`` with, and its scale: prefix_for(38e6) == (1e6, "M")."""
    return next(((scale, prefix) for scale, prefix in _PREFIXES if abs(value) >= scale), _PREFIXES[-1])


def fixed(value: float | None, unit: str, decimals: int = 2) -> str:
    """A number with fixed decimals and a unit ("62.31 deg"); never "-0.00"; "-" for None."""
    special = _special(value)
    if special is not None:
        return special if special == NONE else f"{special} {unit}"
    text = f"{value:.{decimals}f}"
    if float(text) == 0:
        text = f"{0.0:.{decimals}f}"
    return f"{text} {unit}"


def deg(value: float | None) -> str:
    """Degrees with 2 decimals: "62.31 deg"."""
    return fixed(value, "deg")


def db(value: float | None) -> str:
    """Decibels with 2 decimals: "12.10 dB"."""
    return fixed(value, "dB")


def number(value: float | None, digits: int = 3) -> str:
    """A plain ratio with `digits` significant figures ("0.767"); "-" for None."""
    special = _special(value)
    return special if special is not None else f"{value:.{digits}g}"



_REQUIREMENT_UNITS = {"deg": deg, "db": db, "hz": lambda v: eng(v, "Hz"), "s": lambda v: eng(v, "s"), "": number}


def requirement_value(unit: str, value: float | None) -> str:
    """A requirement's value in its metric's unit (a key of netloop.analysis.requirements.METRICS' units)."""
    return _REQUIREMENT_UNITS.get(unit, number)(value)
