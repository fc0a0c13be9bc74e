Expert reference: fc_ota_cmfb.cir broken at xp (xp)
* Written by hand for tests/circuits/test_benches.py: the bench fc_ota_cmfb.cir with a Tian probe placed by an
* expert at xp.  Driver side (node v(xp_a)): Rf1 (the feedback resistor from outn).  Load side (node v(xp)): XM1's gate, Rin1.
* Every AC source of the bench is set to ac 0; the probe: vprobe (series, + on the load side) and iprobe (shunt into the driver side).
* vectors: a=v(xp_a) b=v(xp) series=vprobe shunt=iprobe
* ---------------------------------------------------------------------------
* What it is: a folded-cascode fully differential OTA in a closed-loop
*   testbench (inverting gain of 1 with Rin/Rf), on the real sky130 process.
*   OTA: NMOS pair XM1/XM2 (tail XMT), PMOS current sources XM3/XM4 on the
*   folding nodes fn/fp (their gates are the common-mode control cmfb),
*   PMOS cascodes XM5/XM6 (gate pcas), NMOS cascoded sinks XM7/XM9 and
*   XM8/XM10 (gates nb and ncas).  Bias: Ibias into the diode XB1 (nb); the
*   cascode gates come from the diode-connected XB2 (ncas, fed by the PMOS
*   mirror XB5 -> XB6) and XB8 (pcas, fed by XB9).
*   CMFB: Rcm1/Rcm2 sense the output common mode at cm; NMOS pair XC1 (cm)
*   / XC2 (vcmref) with tail XCT; diode-connected PMOS loads XC3 and XC4.
*   XC4's gate is cmfb and its drain cmd: the 0 V source Vsense between
*   them (a designer's current probe) makes XC4 a diode through it; cmfb
*   drives XM3/XM4, which copy XC4's current.
* Where the loops close:
*   common mode: outp/outn -> Rcm1/Rcm2 -> cm -> XC1 -> ctail -> XC2 -> cmd
*     -> Vsense -> cmfb -> XM3/XM4 -> fn/fp -> XM5/XM6 -> outn/outp.
*     Plausible breaks: cm (driven by Rcm1/Rcm2, loads XC1's gate), cmfb
*     (driven through Vsense by XC2 and the diode XC4; loads the gates of
*     XM3/XM4 and XC4), cmd (driven by the drains of XC2 and XC4, loads
*     Vsense).
*   differential mode: outn -> Rf1 -> xp -> XM1 -> fn -> XM5 -> outn, and
*     outp -> Rf2 -> xn -> XM2 -> fp -> XM6 -> outp (one group with the CM
*     loop: they share the outputs).  Plausible single-node breaks: xp, xn
*     (driven by Rf, loading the pair's gate and Rin), outn, outp.
* Expected loop character (expert probes, expert/fc_ota_cmfb.*.sp): common
*   mode at cm: DC loop gain about 26 dB, crossover about 27 MHz, phase margin
*   about 46 deg; at one output (outn) about 28 dB, 28 MHz, 53 deg; at one
*   input (xp) |T| stays just below 0 dB: the other half's loop, still closed,
*   undoes the differential drive (a pair break is the differential loop's).
* Process: the real SkyWater sky130 models (../sky130/process.spice).
* ---------------------------------------------------------------------------
.param vdd=1.8 vcm=0.9 rin=100k rf=100k rcm=200k cl=1p

.lib ../../sky130/process.spice tt

Vdd vdd 0 dc {vdd}
Vcmref vcmref 0 dc {vcm}
Vinp inp 0 dc {vcm} ac 0
Vinn inn 0 dc {vcm} ac 0
Ibias vdd nb dc 10u

* bias
XB1 nb nb 0 0 sky130_fd_pr__nfet_01v8 w=4 l=1
XB4 pbl nb 0 0 sky130_fd_pr__nfet_01v8 w=4 l=1
XB5 pbl pbl vdd vdd sky130_fd_pr__pfet_01v8 w=8 l=1
XB6 ncas pbl vdd vdd sky130_fd_pr__pfet_01v8 w=8 l=1
XB2 ncas ncas 0 0 sky130_fd_pr__nfet_01v8 w=1 l=2
XB9 pcas nb 0 0 sky130_fd_pr__nfet_01v8 w=4 l=1
XB8 pcas pcas vdd vdd sky130_fd_pr__pfet_01v8 w=2 l=1

* input pair and tail
XMT tail nb 0 0 sky130_fd_pr__nfet_01v8 w=16 l=1
XM1 fn xp tail 0 sky130_fd_pr__nfet_01v8 w=16 l=0.5
XM2 fp xn tail 0 sky130_fd_pr__nfet_01v8 w=16 l=0.5
* folding current sources (controlled by the CMFB) and PMOS cascodes
XM3 fn cmfb vdd vdd sky130_fd_pr__pfet_01v8 w=32 l=1
XM4 fp cmfb vdd vdd sky130_fd_pr__pfet_01v8 w=32 l=1
XM5 outn pcas fn vdd sky130_fd_pr__pfet_01v8 w=16 l=0.5
XM6 outp pcas fp vdd sky130_fd_pr__pfet_01v8 w=16 l=0.5
* cascoded NMOS sinks
XM7 n7 nb 0 0 sky130_fd_pr__nfet_01v8 w=8 l=1
XM9 outn ncas n7 0 sky130_fd_pr__nfet_01v8 w=8 l=0.5
XM8 n8 nb 0 0 sky130_fd_pr__nfet_01v8 w=8 l=1
XM10 outp ncas n8 0 sky130_fd_pr__nfet_01v8 w=8 l=0.5

* common-mode feedback
Rcm1 outp cm {rcm}
Rcm2 outn cm {rcm}
XCT ctail nb 0 0 sky130_fd_pr__nfet_01v8 w=8 l=1
XC1 c3 cm ctail 0 sky130_fd_pr__nfet_01v8 w=4 l=0.5
XC2 cmd vcmref ctail 0 sky130_fd_pr__nfet_01v8 w=4 l=0.5
XC3 c3 c3 vdd vdd sky130_fd_pr__pfet_01v8 w=8 l=1
XC4 cmd cmfb vdd vdd sky130_fd_pr__pfet_01v8 w=8 l=1
Vsense cmd cmfb dc 0

* closed loop: inverting gain of 1
Rin1 inp xp {rin}
Rf1 outn xp_a {rf}
Vprobe xp xp_a dc 0 ac 1
Iprobe 0 xp_a dc 0 ac 0
Rin2 inn xn {rin}
Rf2 outp xn {rf}
CL1 outp 0 {cl}
CL2 outn 0 {cl}
* the operating point as the designer sketched it: Newton converges from here without gmin stepping
.nodeset v(outp)=0.86 v(outn)=0.86 v(cm)=0.86 v(cmfb)=0.59 v(cmd)=0.59 v(fn)=1.59 v(fp)=1.59 v(xp)=0.88 v(xn)=0.88
+ v(tail)=0.19 v(ctail)=0.15 v(c3)=0.64 v(n7)=0.24 v(n8)=0.24 v(pcas)=0.45 v(ncas)=0.99 v(nb)=0.72 v(pbl)=0.61
.end
