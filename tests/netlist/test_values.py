"""SPICE numbers: scale suffixes, units and bad input."""

from __future__ import annotations

import math

import pytest

from netloop.errors import NetlistError
from netloop.netlist import parse_value

# Scale factors from the ngspice manual, section 2.3.1 ("Scale factors"): T G Meg K mil m u n p f.
CASES = [
    ("10pF", 10e-12),
    ("1.5k", 1.5e3),
    ("10meg", 10e6),
    ("10MEG", 10e6),
    ("100gig", 100e9),
    ("2u", 2e-6),
    ("1mil", 25.4e-6),
    ("3M", 3e-3),  # M is milli in SPICE, not mega
    ("4t", 4e12),
    ("5g", 5e9),
    ("7n", 7e-9),
    ("8f", 8e-15),
    ("1e-3", 1e-3),
    ("-2.5e3k", -2.5e6),
    (".5", 0.5),
    ("10V", 10.0),
    ("1kohm", 1e3),
]


@pytest.mark.parametrize(("text", "expected"), CASES)
def test_scale_suffixes(text, expected):
    """Each suffix scales the number as the ngspice manual's table says, case-insensitively."""
    assert math.isclose(parse_value(text), expected, rel_tol=1e-12)


@pytest.mark.parametrize("text", ["", "abc", "k10", "1.5.5x!", "{x}"])
def test_not_a_number(text):
    """Text that does not start with a number is a NetlistError (and a ValueError)."""
    with pytest.raises(NetlistError):
        parse_value(text)
    with pytest.raises(ValueError):
        parse_value(text)


@pytest.mark.parametrize("text", ["abc", "1.5.5x!"])
def test_bad_number_message_names_the_token(text):
    """The refusal says what was expected and quotes the token as written (house rule: one clear message with what was expected)."""
    with pytest.raises(NetlistError, match=r"^expected a number such as 10k, 2\.2u or 1e-3, got " + repr(text).replace(".", r"\.") + "$"):
        parse_value(text)
