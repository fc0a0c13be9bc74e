"""SPICE numbers with SI scale suffixes and trailing units: ``10pF``, ``1.5k``, ``10meg``, ``2u``."""

from __future__ import annotations

import re

from netloop.errors import NetlistSyntaxError

__all__ = ["parse_value", "looks_numeric"]

_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")

# Longest suffixes first: "meg" and "mil" before "m", "gig" before "g".
_SCALES = (
    ("meg", 1e6),
    ("mil", 25.4e-6),
    ("gig", 1e9),
    ("t", 1e12),
    ("g", 1e9),
    ("k", 1e3),
    ("m", 1e-3),
    ("u", 1e-6),
    ("n", 1e-9),
    ("p", 1e-12),
    ("f", 1e-15),
)


def parse_value(text: str) -> float:
    """The number a SPICE value token stands for (scale suffix case-insensitive, trailing units ignored)."""
    s = text.strip()
    m = _NUMBER.match(s)
    if m is None:
        raise NetlistSyntaxError(f"expected a number such as 10k, 2.2u or 1e-3, got {text!r}")
    number = float(m.group(0))
    rest = s[m.end():].lower()
    if not rest:
        return number
    if not rest[0].isalpha():
        raise NetlistSyntaxError(f"expected a number such as 10k, 2.2u or 1e-3, got {text!r}")
    for suffix, scale in _SCALES:
        if rest.startswith(suffix):
            return number * scale
    return number  # a bare unit such as "V", "Hz" or "ohm"


def looks_numeric(token: str) -> bool:
    """Whether a token starts like a number (so it is a value, not a name)."""
    return _NUMBER.match(token) is not None
