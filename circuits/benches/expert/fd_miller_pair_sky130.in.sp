Expert reference: fd_miller_pair_sky130.cir broken at the pair xp,xn (in)
* Written by hand for tests/circuits/test_pair_benches.py: the bench fd_miller_pair_sky130.cir with a Tian probe at each
* node of the pair xp,xn, placed by an expert.  Driver side: Rf2 (Rf1), the feedback resistor from the other output.  Load side: the amplifier's input pin (XM1's gate; XM2's) and Rin1 (Rin2, to the silenced source: either side).
* Every AC source of the bench is set to ac 0; each node's probe: a series source (+ on the load side) and a shunt
* current source into the driver side; the four modal runs (Hurst and Lewis 1995) excite them.
* vectors: ap=v(xp_a) bp=v(xp) an=v(xn_a) bn=v(xn) seriesp=vprobep shuntp=iprobep seriesn=vproben shuntn=iproben
* ---------------------------------------------------------------------------
* What it is: fd_miller_pair.cir on the real sky130 process, at 1.8 V.  A
*   fully differential two-stage op-amp (subcircuit fdamp) closed with
*   Rin/Rf (inverting gain of 1).  First stage: NMOS pair XM1/XM2 (tail XM5
*   from the bias diode XMB1), PMOS loads XM3/XM4 whose gates are the
*   common-mode control cmfb.  Second stage: PMOS common source XM6/XM7 with
*   NMOS current sinks XM8/XM9.  Each half has its Miller branch from the
*   first-stage output to its own output: Rz1 (Rz2) in series with Cc1
*   (Cc2).  CMFB: Rcm1/Rcm2 sense cm; NMOS pair XM10 (cm) / XM11 (vcmref),
*   tail XM14; PMOS diodes XM12 (cmfb, copied by XM3/XM4) and XM13.
* Where the loops close:
*   differential mode: outp -> Rf1 -> xn (pin inn) -> XM2 -> xamp.o1n ->
*     XM7 -> outn, and outn -> Rf2 -> xp -> XM1 -> xamp.o1p -> XM6 -> outp;
*     the Miller loops xamp.o1p -> XM6 -> outp -> Cc1/Rz1 -> xamp.o1p inside.
*     Pair breaks: the first-stage outputs xamp.o1p/xamp.o1n, the outputs
*     xamp.outp/xamp.outn inside the amplifier, the inputs xp/xn.
*   common mode: outp/outn -> Rcm1/Rcm2 -> cm -> XM10 -> cmfb (diode XM12)
*     -> XM3/XM4 -> o1p/o1n -> XM6/XM7 -> outp/outn.
* Expected loop character: see the expert pair probes
*   expert/fd_miller_pair_sky130.*.sp (tests/circuits/test_pair_benches.py).
* Process: the real SkyWater sky130 models (../sky130/process.spice).
* ---------------------------------------------------------------------------
.param vdd=1.8 vcm=0.9 cc=1p rz=2k cl=2p rin=20k rf=20k rcm=200k

.lib ../../sky130/process.spice tt

.subckt fdamp inp inn outp outn vcmref ibias vdd vss cc=1p rz=2k rcm=200k
* bias diode; first stage: NMOS pair, tail, PMOS loads driven by the common-mode control
XMB1 ibias ibias vss vss sky130_fd_pr__nfet_01v8 w=4 l=1
XM5 tail ibias vss vss sky130_fd_pr__nfet_01v8 w=8 l=1
XM1 o1p inp tail vss sky130_fd_pr__nfet_01v8 w=8 l=0.5
XM2 o1n inn tail vss sky130_fd_pr__nfet_01v8 w=8 l=0.5
XM3 o1p cmfb vdd vdd sky130_fd_pr__pfet_01v8 w=8 l=1
XM4 o1n cmfb vdd vdd sky130_fd_pr__pfet_01v8 w=8 l=1
* second stage: PMOS common source, NMOS current sinks
XM6 outp o1p vdd vdd sky130_fd_pr__pfet_01v8 w=40 l=0.5
XM7 outn o1n vdd vdd sky130_fd_pr__pfet_01v8 w=40 l=0.5
XM8 outp ibias vss vss sky130_fd_pr__nfet_01v8 w=32 l=1
XM9 outn ibias vss vss sky130_fd_pr__nfet_01v8 w=32 l=1
* Miller branches: nulling resistor in series with the capacitor, one per half
Rz1 o1p zp {rz}
Cc1 zp outp {cc}
Rz2 o1n zn {rz}
Cc2 zn outn {cc}
* common-mode feedback: sense resistors, NMOS pair, PMOS diodes
Rcm1 outp cm {rcm}
Rcm2 outn cm {rcm}
XM14 ctail ibias vss vss sky130_fd_pr__nfet_01v8 w=4 l=1
XM10 cmfb cm ctail vss sky130_fd_pr__nfet_01v8 w=4 l=0.5
XM11 d11 vcmref ctail vss sky130_fd_pr__nfet_01v8 w=4 l=0.5
XM12 cmfb cmfb vdd vdd sky130_fd_pr__pfet_01v8 w=4 l=1
XM13 d11 d11 vdd vdd sky130_fd_pr__pfet_01v8 w=4 l=1
.ends fdamp

Vdd vdd 0 dc {vdd}
Vcmref vcmref 0 dc {vcm}
Ibias vdd ib dc 10u
Vinp inp 0 dc {vcm} ac 0
Vinn inn 0 dc {vcm} ac 0

Xamp xp xn outp outn vcmref ib vdd 0 fdamp cc={cc} rz={rz} rcm={rcm}
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
