"""The probe's loop check follows control from elsewhere: a behavioural E, G or B reading v(...) or i(...), an F or H reading a
source's current, also from inside a block; without the control the same node is on no loop and is refused."""

from __future__ import annotations

import pytest

from netloop.errors import ProbeError
from netloop.netlist import parse_text
from netloop.probe import break_loop

# Invented loops (reference: their own wiring, read by hand; the measured T of each is checked against ngspice in
# tests/jobs/measure/test_controlled_elsewhere.py): (netlist body, the node broken, the card's text that closes the loop,
# the same card reading something else instead, which leaves no loop).
_SENSE = "G1 0 e 0 fb 1m\nR1 e 0 100k\nVs e es 0\nRs es 0 1k\nRfb fb 0 1k\nVq q 0 0\n"  # vq senses nothing of the loop
CASES = {
    "b-reads-v": ("Vin inp 0 dc 0.5\nB1 e 0 V = 1000*(V(inp)-V(fb))\nR1 e fb 10k\nRg fb 0 10k\n", "e", "V(fb)", "V(inp)"),
    "e-value": ("Vin inp 0 dc 0.5\nE1 e 0 value={1000*(V(inp)-V(fb))}\nR1 e fb 10k\nRg fb 0 10k\n", "e", "V(fb)", "V(inp)"),
    "g-reads-two-nodes": ("G1 0 e value={1m*V(fb,0)}\nRe e 0 1k\nR1 e fb 10k\nRg fb 0 10k\n", "e", "V(fb,0)", "V(0,0)"),
    "f-cccs": (_SENSE + "F1 0 fb Vs 3\n", "fb", "Vs 3", "Vq 3"),
    "h-ccvs": (_SENSE + "H1 fb 0 Vs 3k\n", "fb", "Vs 3k", "Vq 3k"),
    "b-reads-i": (_SENSE + "B1 fb 0 V = 3k*i(Vs)\n", "fb", "i(Vs)", "i(Vq)"),
    # from inside a block: its pins (mapped to the parent's nets), and a source of the parent's found outward
    "block-reads-pins": (".subckt amp inp inn out\nB1 out 0 V = 1000*v(inp,inn)\n.ends\nVin inp 0 dc 0.5\nXa inp fb o amp\n"
                         "Rf o fb 10k\nRg fb 0 10k\n", "o", "v(inp,inn)", "v(inp)"),
    "block-reads-parent-source": (".subckt rd out\nB1 out 0 V = 3k*i(vs)\n.ends\n" + _SENSE.replace("Rfb fb 0 1k\n", "")
                                  + "Xr h rd\nRh h fb 1k\nRfb fb 0 1k\n", "fb", "i(vs)", "i(vq)"),
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_a_node_on_a_loop_closed_by_control_from_elsewhere_is_broken(name):
    body, at, control, _ = CASES[name]
    text = f"{name} (invented)\n{body}.end\n"
    assert control in text
    assert break_loop(parse_text(text), at).side_b == at


@pytest.mark.parametrize("name", sorted(CASES))
def test_without_that_control_the_node_is_on_no_loop(name):
    body, at, control, other = CASES[name]
    text = f"{name} (invented)\n{body.replace(control, other, 1)}.end\n"
    with pytest.raises(ProbeError, match="not on any loop|it is not on a loop"):
        break_loop(parse_text(text), at)


def test_a_node_only_an_expression_reads_is_split_with_the_expression_on_the_load_side():
    """fb's terminals are the divider's (rf brings the signal from e, rg goes to ground) and g1 reads it only in its
    expression: the split keeps the name fb for the load side, so the expression reads the load side, and says so; without
    the reader, fb is on no loop (reference: the wiring, read by hand; T is checked against ngspice in
    tests/jobs/measure/test_controlled_elsewhere.py)."""
    text = "g reads fb (invented)\nG1 0 e value={1m*V(fb)}\nRe e 0 1meg\nRf e fb 10k\nRg fb 0 10k\n.end\n"
    probed = break_loop(parse_text(text), "fb")
    assert (probed.side_b, probed.load_terminals, probed.driver_terminals, probed.load_readers) == ("fb", (), ("rf.n",), ("g1",))
    assert "load side: g1, whose expression reads the node (it keeps its name, so they read the load side)" in probed.decided_by
    given = break_loop(parse_text(text), "fb", driver="rf.n")  # the driver named: the same split, and it says the same
    assert (given.load_terminals, given.driver_terminals, given.load_readers) == ((), ("rf.n",), ("g1",))
    assert "load side: g1, whose expression reads the node" in given.decided_by
    with pytest.raises(ProbeError, match="every terminal but the drivers goes only to AC ground .*; it is not on a loop"):
        break_loop(parse_text(text.replace("V(fb)", "V(e)")), "fb")
