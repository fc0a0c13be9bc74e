"""Numbers with units as an engineer means them (100MHz is mega hertz), every accepted spelling and every refusal."""

from __future__ import annotations

import pytest

from netloop.analysis import parse_requirement
from netloop.analysis.quantities import parse_quantity
from netloop.errors import PlanError

# The SI prefixes (BIPM, The International System of Units, 9th edition 2019, table 7) and SPICE's meg.
ACCEPTED = [
    # frequency
    ("100MHz", "hz", 100e6), ("100 MHz", "hz", 100e6), ("100MHZ", "hz", 100e6), ("100Mhz", "hz", 100e6),
    ("100meg", "hz", 100e6), ("100MEG", "hz", 100e6), ("100Meg", "hz", 100e6), ("100megHz", "hz", 100e6),
    ("100mHz", "hz", 0.1), ("10m", "hz", 0.01), ("1k", "hz", 1e3), ("1K", "hz", 1e3), ("1kHz", "hz", 1e3),
    ("1khz", "hz", 1e3), ("2.5GHz", "hz", 2.5e9), ("2.5g", "hz", 2.5e9), ("1THz", "hz", 1e12), ("1t", "hz", 1e12),
    ("44.7e6", "hz", 44.7e6), ("1e6Hz", "hz", 1e6), ("1Hz", "hz", 1.0), ("1", "hz", 1.0), (".5GHz", "hz", 0.5e9),
    ("3uHz", "hz", 3e-6), ("3u", "hz", 3e-6),
    # time
    ("10ns", "s", 10e-9), ("10n", "s", 10e-9), ("10 ns", "s", 10e-9), ("10NS", "s", 10e-9), ("1ms", "s", 1e-3),
    ("1m", "s", 1e-3), ("2us", "s", 2e-6), ("2\u00b5s", "s", 2e-6), ("2u", "s", 2e-6), ("5ps", "s", 5e-12),
    ("5fs", "s", 5e-15), ("1s", "s", 1.0), ("1e-9", "s", 1e-9), ("1Ms", "s", 1e6),
    # dB and degrees: plain numbers, optional unit word
    ("3dB", "db", 3.0), ("3 dB", "db", 3.0), ("3db", "db", 3.0), ("3DB", "db", 3.0), ("-6", "db", -6.0),
    ("45deg", "deg", 45.0), ("45 DEG", "deg", 45.0), ("45", "deg", 45.0),
    # plain ratio
    ("0.5", "", 0.5), ("500m", "", 0.5),
]


@pytest.mark.parametrize("text,unit,value", ACCEPTED)
def test_every_accepted_spelling(text, unit, value):
    """Each spelling gives the value an engineer means, with SI prefixes (M mega before a unit, m milli) and SPICE's meg."""
    assert parse_quantity(text, unit) == pytest.approx(value, rel=1e-15)


@pytest.mark.parametrize(
    "text,unit,fault",
    [
        ("100M", "hz", "write 100meg or 100MHz for mega, or 100m for milli"),
        ("1M", "s", "write 1meg or 1Ms for mega, or 1m for milli"),
        ("1M", "", "write 1meg for mega"),
        ("100mhz", "hz", "write 100MHz (or 100meg) for mega hertz, 100mHz for milli hertz"),
        ("10ns", "hz", "is a time (s), but a frequency is expected"),
        ("1kHz", "s", "is a frequency (Hz), but a time is expected"),
        ("3kdB", "db", "a value in dB is a plain number"),
        ("45mdeg", "deg", "a value in deg is a plain number"),
        ("1x", "hz", "'x' is not a multiplier or unit"),
        ("fast", "hz", "'fast' is not a number"),
        ("1e400", "hz", "not a finite number"),
    ],
)
def test_refusals_say_what_to_write(text, unit, fault):
    """Ambiguous, mismatched or unreadable values are refused with a message that says what to write."""
    with pytest.raises(PlanError) as info:
        parse_quantity(text, unit)
    assert fault in str(info.value)


@pytest.mark.parametrize(
    "text,threshold",
    [("fc>=100MHz", 100e6), ("fc>=100meg", 100e6), ("FC >= 100 MHz", 100e6), ("dm>=10ns", 10e-9), ("gm>=3dB", 3.0),
     ("pm>=45deg", 45.0), ("peak<=3dB", 3.0), ("fc>=10mHz", 0.01)],
)
def test_requirements_read_units_as_an_engineer_means_them(text, threshold):
    """A requirement's value follows the same rules: fc>=100MHz is 1e8 Hz (it was read as 0.1 Hz and passed every loop)."""
    assert parse_requirement(text).threshold == pytest.approx(threshold, rel=1e-15)


@pytest.mark.parametrize(
    "unit,expected",
    [
        ("hz", "a frequency such as 1k, 10meg, 100MHz or 2.5GHz"),
        ("s", "a time such as 1n, 10ns or 2us"),
        ("db", "a level in dB such as 3 or 3dB"),
        ("deg", "an angle such as 45 or 45deg"),
        ("", "a plain number such as 0.5 or 2"),
    ],
)
def test_a_value_that_is_no_number_is_refused_with_examples_of_the_unit(unit, expected):
    """The refusal of a value that is not a number shows, word for word, what the quantity is and how to write one (house
    rule: say what was expected); each example given is itself accepted."""
    with pytest.raises(PlanError) as info:
        parse_quantity("fast", unit)
    assert str(info.value) == f"'fast' is not a number; expected {expected}"
    for example in expected.split(" such as ")[1].replace(" or ", ", ").split(", "):
        parse_quantity(example, unit)


@pytest.mark.parametrize("text,unit,value", [("100 M Hz", "hz", 100e6), ("2 n s", "s", 2e-9), ("3 k", "hz", 3e3)])
def test_spaces_between_multiplier_and_unit(text, unit, value):
    """Spaces are allowed between the number, the multiplier and the unit word (module docstring), SI prefixes as in
    ACCEPTED."""
    assert parse_quantity(text, unit) == pytest.approx(value, rel=1e-15)
