"""Loops that close through elements controlled from elsewhere (a behavioural B, E or G reading v(...) or i(...); an F or H
reading a source's current): found, broken and measured exactly, as ngspice sees the same circuit opened by hand."""

from __future__ import annotations

import numpy as np
import pytest
from hand_opened import ngspice_vector

from netloop.jobs.discover import check_loops
from netloop.jobs.measure import Sweep, measure
from netloop.netlist import parse_text

pytestmark = pytest.mark.ngspice

# Invented loops, each with (where it is broken, the card that closes it, that card opened by hand: writing to a node x of
# its own, or reading x, with the break node driven, or x driven, by a 1 V AC source, the node whose voltage is -T).
# An error amplifier e = 1000 (inp - fb) into R1/C1, fed back by the divider Rf/Rg (with Cf across Rf in the first):
_DIVIDER = "R1 e o 10k\nC1 o 0 10p\nRf o fb 10k\nRg fb 0 10k\n"
# A transconductor g1 into e, whose current through the 0 V source vs is read back (times 3) into fb:
_SENSE = "G1 0 e 0 fb 1m\nR1 e 0 100k\nC1 e 0 10p\nVs e es 0\nRs es 0 1k\n"
_READ_FB = ("G1 0 e 0 fb 1m\n", "G1 0 e 0 x 1m\nVt x 0 dc 0 ac 1\n", "fb")
CASES = {
    "b-reads-v": ("Vin inp 0 dc 0.5\nB1 e 0 V = 1000*(V(inp)-V(fb))\n" + _DIVIDER + "Cf o fb 1p\n", "e",
                  ("B1 e 0 V = 1000*(V(inp)-V(fb))\n", "B1 x 0 V = 1000*(V(inp)-V(fb))\nVt e 0 dc 0 ac 1\n", "x")),
    "e-value": ("Vin inp 0 dc 0.5\nE1 e 0 value={1000*(V(inp)-V(fb))}\n" + _DIVIDER, "e",
                ("E1 e 0 value={1000*(V(inp)-V(fb))}\n", "E1 x 0 value={1000*(V(inp)-V(fb))}\nVt e 0 dc 0 ac 1\n", "x")),
    "g-value": ("Vin inp 0 dc 0.5\nG1 0 e value={1m*(V(inp)-V(fb))}\nRe e 0 1meg\n" + _DIVIDER, "e",
                ("G1 0 e value={1m*(V(inp)-V(fb))}\n", "G1 0 e value={1m*(V(inp)-V(x))}\nVt x 0 dc 0 ac 1\n", "fb")),
    # broken where only the expression reads the node (no load terminal there: the expression reads the load side)
    "g-value-read-at-fb": ("Vin inp 0 dc 0.5\nG1 0 e value={1m*(V(inp)-V(fb))}\nRe e 0 1meg\n" + _DIVIDER, "fb",
                           ("G1 0 e value={1m*(V(inp)-V(fb))}\n", "G1 0 e value={1m*(V(inp)-V(x))}\nVt x 0 dc 0 ac 1\n", "fb")),
    "f-cccs": (_SENSE + "F1 0 fb Vs 3\nRfb fb 0 1k\nCfb fb 0 1p\n", "fb", _READ_FB),
    "h-ccvs": (_SENSE + "H1 h 0 Vs 3k\nRh h fb 1k\nCfb fb 0 1p\n", "fb", _READ_FB),
    "b-reads-i": (_SENSE + "B1 h 0 V = 3k*i(Vs)\nRh h fb 1k\nCfb fb 0 1p\n", "fb", _READ_FB),
    # a behavioural amplifier block: its B reads the block's pins, named as the block names them
    "b-in-a-block": (".subckt amp inp inn out\nB1 o1 0 V = 1000*v(inp,inn)\nRo o1 out 1k\n.ends\nVin inp 0 dc 0.5\n"
                     "Xa inp fb o amp\nC1 o 0 10p\nRf o fb 10k\nRg fb 0 10k\n", "xa.o1",
                     ("B1 o1 0 V = 1000*v(inp,inn)\n", "B1 x 0 V = 1000*v(inp,inn)\nVt o1 0 dc 0 ac 1\n", "xa.x")),
    # the same block broken at its inverting input's net, which only its expression reads
    "b-in-a-block-read-at-fb": (".subckt amp inp inn out\nB1 out 0 V = 1000*v(inp,inn)\n.ends\nVin inp 0 dc 0.5\n"
                                "Xa inp fb o1 amp\nRo o1 o 1k\nC1 o 0 10p\nRf o fb 10k\nRg fb 0 10k\n", "fb",
                                ("Xa inp fb o1 amp\n", "Xa inp x o1 amp\nVt x 0 dc 0 ac 1\n", "fb")),
}
SWEEP = Sweep(fmin_hz=1.0, fmax_hz=1e12, points_per_decade=10, refine=False, fmin_given=True, fmax_given=True)


@pytest.mark.parametrize("name", sorted(CASES))
def test_a_loop_through_an_element_controlled_from_elsewhere_is_measured_as_ngspice_sees_it_opened(name, tmp_path):
    """T at the break equals -v(returned) of the same circuit opened by hand (the controlling input reads a node driven by a
    1 V AC source, or the controlled output writes to a node of its own while the break node is driven): the inputs draw no
    current and the outputs are ideal, so that opening is exact (Bode's return ratio), and ngspice's own AC analysis of it
    is the reference. The probe's loop check follows the control: it refused every node before ('no path leads from its
    load side back to its driver side'), and `netloop check` reported the loop as not measured."""
    body, at, (card, opened_card, returned) = CASES[name]
    text = f"{name} (invented)\n{body}.end\n"
    result = measure(parse_text(text), at, sweep=SWEEP)
    assert card in text
    f, v = ngspice_vector(text.replace(card, opened_card), tmp_path, "ac dec 10 1 1e12", f"v({returned})")
    assert np.allclose(result.analysis.freq_hz, f, rtol=1e-8, atol=0)  # wrdata prints 9 significant digits
    assert np.allclose(result.analysis.t, -v, rtol=1e-7, atol=1e-15)
    assert result.verdict == "pass", [c.detail for c in result.failed_checks]


@pytest.mark.parametrize("name", sorted(CASES))
def test_the_census_breaks_and_measures_such_a_loop(name):
    """`netloop check NETLIST` on each: one loop group, broken and measured (a verdict, not 'not measured')."""
    body, _, _ = CASES[name]
    (group,) = check_loops(parse_text(f"{name} (invented)\n{body}.end\n")).groups
    assert group.result is not None and group.verdict == "pass", group.reason if group.result is None else group.result.failed_checks


def test_a_load_side_only_an_expression_reads_is_named_in_the_report_and_the_document():
    """At fb of g-value-read-at-fb no terminal loads the node (g1 reads it in its expression): the text's load row, the
    JSON document and the result read back from it name g1, where they said '-' (reference: the wiring, read by hand)."""
    from netloop.jobs.document import to_document
    from netloop.jobs.document_read import result_from_document
    from netloop.report.text import format_text

    body, at, _ = CASES["g-value-read-at-fb"]
    result = measure(parse_text(f"read at fb (invented)\n{body}.end\n"), at, sweep=SWEEP)
    assert (result.breaks.load_terminals, result.breaks.load_readers) == ((), ("g1",))
    rows = [line.split(None, 1) for line in format_text(result).splitlines() if line.startswith("  load ")]
    assert rows == [["load", "g1 (an expression reads the node)"]]
    doc = to_document(result)
    assert (doc["break"]["load_terminals"], doc["break"]["load_readers"]) == ([], ["g1"])
    assert result_from_document(doc).breaks == result.breaks
