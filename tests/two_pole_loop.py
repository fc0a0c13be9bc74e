"""An invented behavioural single loop for tests: error amplifier e0 (gain 1000), RC pole at 1 kHz, unity buffer eb, RC
pole at 1 MHz back to out, so T(s) = 1000 / ((1 + s/w1)(1 + s/w2)) at any break (circuit theory)."""

from __future__ import annotations

import math

A0, F1, F2 = 1000.0, 1e3, 1e6  # dc loop gain and the two poles (Hz)
C1 = 1.0 / (2 * math.pi * 1e3 * F1)  # 1 kOhm, pole at 1 kHz
C2 = 1.0 / (2 * math.pi * 1e3 * F2)  # 1 kOhm, pole at 1 MHz
ELEMENTS = f"""vref ref 0 dc 0.5
e0 n0 0 ref out 1000
r1 n0 p1 1k
c1 p1 0 {C1:.17g}
eb b1 0 p1 0 1
r2 b1 out 1k
c2 out 0 {C2:.17g}
"""  # the loop's element lines, for a netlist that adds more
LOOP = "behavioural single loop: gain 1000, poles 1 kHz and 1 MHz\n" + ELEMENTS + ".end\n"
