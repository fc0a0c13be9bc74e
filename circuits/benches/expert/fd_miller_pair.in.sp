Expert reference: fd_miller_pair.cir broken at the pair xp,xn (in)
* Written by hand for tests/circuits/test_pair_benches.py: the bench fd_miller_pair.cir with a Tian probe at each node of the
* pair xp,xn, placed by an expert.  Driver side: Rf2 (Rf1), the feedback resistor from the other output.  Load side: the amplifier's input pin (M1's gate; M2's) and Rin1 (Rin2, to the silenced source: either side).
* Every AC source of the bench is set to ac 0; each node's probe: a series source (+ on the load side) and a shunt
* current source into the driver side; the four modal runs (Hurst and Lewis 1995) excite them.
* vectors: ap=v(xp_a) bp=v(xp) an=v(xn_a) bn=v(xn) seriesp=vprobep shuntp=iprobep seriesn=vproben shuntn=iproben
* ---------------------------------------------------------------------------
* What it is: a fully differential two-stage op-amp (subcircuit fdamp) closed
*   with Rin/Rf (inverting gain of 1), as a designer's testbench holds it.
*   First stage: PMOS pair M1/M2 (tail M5 from the bias diode Mbp), NMOS
*   loads M3/M4 whose gates are the common-mode control cmfb.  Second stage:
*   NMOS common source M6/M7 with PMOS current sources M8/M9.  Each half has
*   its Miller branch from the first-stage output to its own output: the
*   nulling resistor Rz1 (Rz2) in series with Cc1 (Cc2).  CMFB: Rcm1/Rcm2
*   sense cm; PMOS pair M10 (cm) / M11 (vcmref), tail M14; NMOS diodes M12
*   (cmfb, copied by M3/M4) and M13.
* Where the loops close:
*   differential mode: outp -> Rf1 -> xn (pin inn) -> M2 -> xamp.o1n -> M7
*     -> outn, and outn -> Rf2 -> xp -> M1 -> xamp.o1p -> M6 -> outp; the
*     Miller loops xamp.o1p -> M6 -> outp -> Cc1/Rz1 -> xamp.o1p (and the
*     mirror half) inside.  Pair breaks: the first-stage outputs
*     xamp.o1p/xamp.o1n (each driven by M1/M3, M2/M4; loads M6's gate and the
*     Miller branch Rz1), the outputs outp/outn, the inputs xp/xn (driven
*     through Rf2/Rf1 from the outputs; load the pair's gates).
*   common mode: outp/outn -> Rcm1/Rcm2 -> cm -> M10 -> cmfb (diode M12) ->
*     M3/M4 -> o1p/o1n -> M6/M7 -> outp/outn.  Plausible breaks: cm, cmfb.
* Expected loop character (expert pair probe at the first-stage outputs,
*   expert/fd_miller_pair.o1.pair.sp, Miller branches with the driver):
*   differential mode DC loop gain about 66 dB, crossover about 13 MHz,
*   phase margin about 70 deg; common mode closed through CMFB.
* Models: INVENTED level-1 cards (../models/corners.lib), not a real process.
* ---------------------------------------------------------------------------
.param vdd=3.3 vcm=1.65 cc=1p rz=2k cl=2p rin=20k rf=20k rcm=200k

.lib ../../models/corners.lib tt

.subckt fdamp inp inn outp outn vcmref pbias vdd cc=1p rz=2k rcm=200k
* first stage: PMOS pair, tail, NMOS loads driven by the common-mode control
M5 tail pbias vdd vdd pch w=20u l=1u
M1 o1p inp tail tail pch w=20u l=1u
M2 o1n inn tail tail pch w=20u l=1u
M3 o1p cmfb 0 0 nch w=10u l=1u
M4 o1n cmfb 0 0 nch w=10u l=1u
* second stage: NMOS common source, PMOS current sources
M6 outp o1p 0 0 nch w=20u l=1u
M7 outn o1n 0 0 nch w=20u l=1u
M8 outp pbias vdd vdd pch w=50u l=1u
M9 outn pbias vdd vdd pch w=50u l=1u
* Miller branches: nulling resistor in series with the capacitor, one per half
Rz1 o1p zp {rz}
Cc1 zp outp {cc}
Rz2 o1n zn {rz}
Cc2 zn outn {cc}
* common-mode feedback: sense resistors, PMOS pair, NMOS diodes
Rcm1 outp cm {rcm}
Rcm2 outn cm {rcm}
M14 ctail pbias vdd vdd pch w=10u l=1u
M10 cmfb cm ctail ctail pch w=10u l=1u
M11 d11 vcmref ctail ctail pch w=10u l=1u
M12 cmfb cmfb 0 0 nch w=5u l=1u
M13 d11 d11 0 0 nch w=5u l=1u
.ends fdamp

Vdd vdd 0 dc {vdd}
Vcmref vcmref 0 dc {vcm}
Ibias pbias 0 dc 20u
Mbp pbias pbias vdd vdd pch w=10u l=1u
Vinp inp 0 dc {vcm} ac 0
Vinn inn 0 dc {vcm} ac 0

Xamp xp xn outp outn vcmref pbias vdd fdamp cc={cc} rz={rz} rcm={rcm}
Rin1 inp xp {rin}
Rin2 inn xn {rin}
Rf1 outp xn_a {rf}
Rf2 outn xp_a {rf}
Vprobep xp xp_a dc 0 ac 0
Iprobep 0 xp_a dc 0 ac 0
Vproben xn xn_a dc 0 ac 0
Iproben 0 xn_a dc 0 ac 0
CL1 outp 0 {cl}
CL2 outn 0 {cl}
.end
