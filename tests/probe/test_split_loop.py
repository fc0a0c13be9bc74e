"""split_loop: the probed netlist at once and the loop check later, with exactly break_loop's outcome."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import pytest

from netloop.errors import ProbeError
from netloop.netlist import parse_file, parse_text
from netloop.probe import break_loop, split_loop

CIRCUITS = Path(__file__).resolve().parent.parent.parent / "circuits"

# Node out closes two loops, through r1 and through e2 (the circuit of tests/probe/test_sides.py::test_several_loops_warn),
# and node b of the open chain returns to nothing (circuit theory: no path from b's load back to its driver).
TWO_LOOPS = "two loops\nVin in 0 dc 0 ac 1\nG1 0 out x 0 1m\nRo out 0 10k\nE1 x 0 y 0 -1\nR1 out y 1k\nR2 y 0 1k\nE2 x2 0 out 0 1\nR3 x2 x 1k\n.end\n"
OPEN_CHAIN = "open chain\nvin in 0 dc 0 ac 1\ne1 a 0 in 0 10\nr1 a b 1k\nr2 b c 1k\nc1 c 0 1n\n.end\n"


@pytest.mark.parametrize(("netlist", "at"), [
    (CIRCUITS / "miller_buffer.cir", "out"),
    (CIRCUITS / "ldo.cir", "fb"),
    (CIRCUITS / "fd_amp_cmfb.cir", "outn"),
    (None, "out"),
])
def test_check_returns_break_loops_record(netlist, at):
    """check() returns a record equal to break_loop's, and the record given at once differs from it only in its warnings."""
    parsed = parse_text(TWO_LOOPS) if netlist is None else parse_file(netlist)
    # Reference: netloop.probe.break_loop, the one-step form every other caller uses.
    expected = break_loop(parsed, at)
    unchecked, check = split_loop(parsed, at)
    checked = check()
    assert checked == expected
    assert unchecked == replace(checked, warnings=())
    if netlist is None:
        assert any("feeds 2 loops" in w for w in checked.warnings)


def test_node_on_no_loop_is_refused_by_check_only():
    """For a node on no loop the split succeeds and check() raises break_loop's own refusal, word for word."""
    parsed = parse_text(OPEN_CHAIN)
    with pytest.raises(ProbeError) as direct:
        break_loop(parsed, "b")
    unchecked, check = split_loop(parsed, "b")
    assert unchecked.side_b == "b"
    with pytest.raises(ProbeError) as later:
        check()
    assert str(later.value) == str(direct.value) and "is not on any loop" in str(later.value)


def test_refusals_before_the_split_come_at_once():
    """A node that cannot be split at all (ground) is refused by split_loop itself, as break_loop refuses it."""
    parsed = parse_text(OPEN_CHAIN)
    with pytest.raises(ProbeError) as direct:
        break_loop(parsed, "0")
    with pytest.raises(ProbeError) as early:
        split_loop(parsed, "0")
    assert str(early.value) == str(direct.value)
