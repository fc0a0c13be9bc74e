"""A loop that closes through coupled inductors (a K card): found, broken and measured exactly."""

from __future__ import annotations

import numpy as np
import pytest
from hand_opened import ngspice_vector

from netloop.jobs.measure import Sweep, measure
from netloop.netlist import parse_text

pytestmark = pytest.mark.ngspice

# Invented: g1 drives the primary l1 (with r1), the secondary l2 (loaded by rs) is read back by e1, whose output closes
# the loop at node in; l1 and l2 are coupled by k1 (0.9) and by nothing else.
LOOP = ("transformer-coupled loop (invented)\nG1 0 p in 0 1m\nR1 p 0 1k\nL1 p 0 1m\nL2 s 0 1m\nK1 L1 L2 0.9\nRs s 0 1k\n"
        "E1 in 0 s 0 -1\n.end\n")


def test_a_loop_through_a_transformer_is_measured_as_ngspice_sees_it_opened_by_hand(tmp_path):
    """Broken at in (e1's output, g1's control input), T equals -v(x) of the same circuit opened by hand (e1 writing to
    a node x of its own, in driven by a 1 V AC source): g1's input draws no current, so that opening is exact (Bode's
    return ratio), and ngspice's own AC analysis of it is the reference. The probe's loop check follows the coupling: it
    refused the node before ('no path leads from its load side back to its driver side'), and `netloop check` reported the
    loop as not measured."""
    result = measure(parse_text(LOOP), "in", sweep=Sweep(fmin_hz=1.0, fmax_hz=1e9, points_per_decade=10, refine=False,
                                                               fmin_given=True, fmax_given=True))
    opened = LOOP.replace("E1 in 0 s 0 -1\n", "E1 x 0 s 0 -1\nVt in 0 dc 0 ac 1\n")
    f, v = ngspice_vector(opened, tmp_path, "ac dec 10 1 1e9", "v(x)")
    assert np.allclose(result.analysis.freq_hz, f, rtol=1e-8, atol=0)  # wrdata prints 9 significant digits
    assert np.allclose(result.analysis.t, -v, rtol=1e-7, atol=1e-15)
    assert result.verdict == "pass" and not result.analysis.regulates  # |T| peaks near -7 dB: it never reaches 0 dB
