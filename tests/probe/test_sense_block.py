"""A common-mode sense node inside a block, fed by a sensing block of resistors between the amplifier's outputs, is split
with that block's output pin on the driver side (its outputs drive it from outside), as ngspice sees it opened by hand."""

from __future__ import annotations

import numpy as np
import pytest

from hand_opened import ngspice_vector
from netloop.jobs.measure import Sweep, measure
from netloop.netlist import parse_text
from netloop.probe import break_loop

# Invented, behavioural: two outputs op/on (transconductors Gp/Gn into R || C) averaged by the block sense (R1, R2 between
# its pins a, b and cm) inside the block cmfb, whose amplifier E1 compares the average s with ref and drives ctl through
# Rx/Cx; ctl sets both outputs. Written as a schematic tool writes blocks: the sense network is a block of its own.
LOOP = """common-mode loop through a sensing block (invented)
.subckt sense a b cm
R1 a cm 10k
R2 b cm 10k
.ends sense
.subckt cmfb op on ctl
Xs op on s sense
Vr ref 0 dc 0.5
E1 x 0 ref s 100
Rx x ctl 1k
Cx ctl 0 100p
.ends cmfb
Gp 0 op ctl 0 1m
Rp op 0 10k
Cp op 0 10p
Gn 0 on ctl 0 1m
Rn on 0 10k
Cn on 0 10p
Xc op on ctl cmfb
.end
"""
SWEEP = Sweep(fmin_hz=1.0, fmax_hz=1e12, points_per_decade=10, refine=False, fmin_given=True, fmax_given=True)


def test_the_sense_blocks_output_pin_drives_the_sense_node():
    """Before, 'no driver found for node xc.s': inside the block only an instance pin (xs.cm) and an input (e1) sit on the
    node, and the resistors behind the pin reach only the block's own pins. Now the pin is an output: its resistors lead to
    the pins a, b, wired outside the blocks to op and on, which the transconductors Gp, Gn drive."""
    probed = break_loop(parse_text(LOOP), "xc.s")
    assert (probed.driver_terminals, probed.load_terminals) == (("xc.xs.cm",), ("xc.e1.cn",)), probed.decided_by


@pytest.mark.ngspice
def test_the_common_mode_loop_at_the_sense_node_is_measured_as_ngspice_sees_it_opened(tmp_path):
    """T at xc.s equals -v(xc.s) with E1's sensing input moved to a node driven by a 1 V AC source (an ideal input draws no
    current, so that opening is exact: Bode's return ratio), by ngspice's own AC analysis."""
    result = measure(parse_text(LOOP), "xc.s", sweep=SWEEP)
    opened = LOOP.replace("E1 x 0 ref s 100\n", "E1 x 0 ref t 100\nVt t 0 dc 0.5 ac 1\n")
    f, v = ngspice_vector(opened, tmp_path, "ac dec 10 1 1e12", "v(xc.s)")
    assert np.allclose(result.analysis.freq_hz, f, rtol=1e-8, atol=0)  # wrdata prints 9 significant digits
    assert np.allclose(result.analysis.t, -v, rtol=1e-7, atol=1e-15)
    assert result.verdict == "pass", [c.detail for c in result.failed_checks]
