"""A 0 V source in series off the broken node is a wire: the split is the one of the same circuit without it."""

from __future__ import annotations

import pytest

from netloop.netlist import parse_text
from netloop.probe.breaking import locate_split

from .test_split_rules import TWO_STAGE

# An invented one-stage amplifier (E1 inverts at x) with two feedback branches from out back to x: Cf, and the T network
# Rf1, Rf2 with Cm to ground.
ONE_STAGE = ("one-stage amplifier with two feedback branches (invented)\nVin in 0 dc 0 ac 1\nRin in x 10k\nCf out x 1p\n"
             "Rf1 out m 10k\nRf2 m x 10k\nCm m 0 1p\nE1 out 0 0 x 1e4\n")


def _split(text: str, at: str) -> tuple:
    _, _, split = locate_split(parse_text(text), at)
    return ({t.label for t in split.driver}, {t.label for t in split.load}, {t.label for t in split.shunt}, split.decided_by,
            tuple((b.element, b.side, b.by_rule) for b in split.bridges))


@pytest.mark.parametrize("text, at, old, new", [
    (TWO_STAGE, "out", "Rf out fb 20k\n", "Rf out fs 20k\nVfs fs fb dc 0\n"),  # an ammeter in the feedback path
    (TWO_STAGE, "out", "Cc cz out 1.2p\n", "Vcz cz cy dc 0\nCc cy out 1.2p\n"),  # an ammeter in the Miller branch
    (TWO_STAGE, "o1", "Cc cz out 1.2p\n", "Vcz cz cy dc 0\nCc cy out 1.2p\n"),
    (ONE_STAGE, "out", "Rf2 m x 10k\n", "Rf2 m mx 10k\nVmx mx x dc 0\n"),  # an ammeter in the T network
], ids=["feedback path", "Miller branch at out", "Miller branch at o1", "T network"])
def test_a_zero_volt_ammeter_off_the_node_leaves_the_split_alone(text, at, old, new):
    """A 0 V source put in series in a branch away from the node changes neither the sides, nor a reason, nor a distance counted."""
    # Reference: Kirchhoff's voltage law, v = 0 across the source at DC and AC (common practice: ammeters in SPICE decks), so
    # the circuit is the one without it, and docs/splitting.md counts passive elements only (a source is looked through).
    assert old in text
    assert _split(text.replace(old, new), at) == _split(text, at)


def test_a_feedback_resistor_written_in_two_parts_leaves_the_miller_branch_with_the_output_stage():
    """With the feedback resistor as two resistors in series (19k + 1k), Cc still stays with M6 and Rf leads on into the loop."""
    # By hand (test_split_rules.py, test_miller_branch_goes_with_the_second_stage_at_both_of_its_ends): the loop from out comes
    # back to M6's gate o1 through Rf, Rs, M1 and the mirror M3/M4, however many resistors the feedback path has.
    text = TWO_STAGE.replace("Rf out fb 20k\n", "Rf out fs 19k\nRs fs fb 1k\n")
    assert _split(text, "out") == _split(TWO_STAGE, "out")
    assert _split(text, "out")[:2] == ({"m6.d", "m7.d", "cc.n"}, {"rf.p"})
