"""`netloop check --at-pair`: the coupling line under the two modes' summaries."""

from __future__ import annotations

import pytest

from netloop.cli.check_cmd import coupling_line
from netloop.jobs.measure_pair import Coupling


@pytest.mark.parametrize(("coupling", "line"), [
    # figures invented; each band in Hz with 3 significant figures, as every frequency netloop prints (report.notation.eng)
    (Coupling(-52.3, -61.0, 1.5e6, 2.5e5),
     "coupling  negligible: DM->CM -52.30 dB up to 1.50 MHz, CM->DM -61.00 dB up to 250 kHz (threshold -40.00 dB)"),
    (Coupling(-61.0, -32.3, 2.5e5, 999.96e3),  # above the -40 dB threshold in one direction: coupled
     "coupling  COUPLED: DM->CM -61.00 dB up to 250 kHz, CM->DM -32.30 dB up to 1.00 MHz (threshold -40.00 dB)"),
    (Coupling(-32.3, -61.0, 1e6, 1e3, unjudged="the common mode measured no loop"),
     "coupling  not judged: the common mode measured no loop"),
])
def test_coupling_line_gives_each_direction_with_its_band_in_hz(coupling, line):
    """Each direction's worst coupling in dB, up to its own band in Hz, against the threshold; or why it is not judged."""
    assert coupling_line(coupling) == line
