"""The number ngspice's netlist reader makes of a value token, so that a value changed in place is the very double a fresh load reads."""

from __future__ import annotations

import math
import re

__all__ = ["netlist_number", "netlist_product"]

# ngspice 39 reads a netlist number (a source's DC value) digit by digit into a double and scales it by
# pow(10, exponent) once at the end (spicelib/parser/inpeval.c, INPevaluate), so 1.65 becomes 165 * 10**-2
# = 1.6500000000000001, not the correctly rounded 1.65. Its command parser (``alter``) has rules of its
# own and differs again (1.7e-05 becomes 1.7000000000000003e-05). Written as the product ngspice's
# reader computes, "165 * 1e-2", the command gives the reader's double exactly: tests/sim/test_in_place.py
# checks netlist_number and netlist_product against ngspice itself.
_NUMBER = re.compile(r"([+-]?)(\d*)(?:\.(\d*))?(?:[eEdD]([+-]?)(\d*))?([a-zA-Z]*)")
_SCALE = {"t": 12, "g": 9, "k": 3, "u": -6, "n": -9, "p": -12, "f": -15, "a": -18}


def _terms(text: str) -> tuple[int, int, float]:
    """(signed integer mantissa, power of ten, the mil factor) of a number token as INPevaluate reads it."""
    token = text.strip()
    found = _NUMBER.fullmatch(token)
    if not found or not (found[2] or found[3]):
        raise ValueError(f"{text!r} is not a number ngspice reads as one")
    sign_text, whole, fraction, exp_sign, exp_digits, suffix = found.groups()
    mantissa = int((whole or "") + (fraction or "") or "0") * (-1 if sign_text == "-" else 1)
    if not fraction and exp_sign is None and not suffix:
        return mantissa, 0, 1.0
    exponent = -len(fraction or "") + (-int(exp_digits or 0) if exp_sign == "-" else int(exp_digits or 0))
    word = suffix.lower()
    factor = 1.0
    if word.startswith("meg"):
        exponent += 6
    elif word.startswith("mil"):
        exponent -= 6
        factor = 25.4
    elif word.startswith("m"):
        exponent -= 3
    elif word[:1] in _SCALE:
        exponent += _SCALE[word[:1]]
    return mantissa, exponent, factor


def netlist_product(text: str) -> str:
    """An ``alter`` value that gives exactly netlist_number(text): "165 * 1e-2" for "1.65", "17 * 1e-6" for "17u".
    ValueError when no such product is exact (more than 15 digits, the "mil" suffix)."""
    mantissa, exponent, factor = _terms(text)
    if factor != 1.0 or abs(mantissa) >= 10**15:
        raise ValueError(f"{text!r} cannot be given to ngspice's alter exactly")
    return f"{mantissa} * 1e{exponent}" if exponent else str(mantissa)


def netlist_number(text: str) -> float:
    """The double ngspice 39's netlist reader gives the number token ``text`` ("1.65", "-40", "10u", "2.5meg");
    ValueError when the token is no plain number (an expression, a parameter name)."""
    mantissa, exponent, factor = _terms(text)
    return float(mantissa) * factor * math.pow(10.0, exponent)  # 10 ** 0 == 1 exactly: an unscaled token reads the same
