Expert reference: miller_tb.cir broken at xop.o1 (o1.rz-load)
* Written by hand for tests/circuits/test_benches.py: the bench miller_tb.cir with a Tian probe placed by an
* expert at xop.o1.  Driver side (node v(xop.o1a)): the drains of XM2 and XM4.  Load side (node v(xop.o1)): XM6's gate and Rz (the Miller branch: its loop closes on the load side).
* Every AC source of the bench is set to ac 0; the probe: v.xop.vprobe (series, + on the load side) and i.xop.iprobe (shunt into the driver side).
* vectors: a=v(xop.o1a) b=v(xop.o1) series=v.xop.vprobe shunt=i.xop.iprobe
* ---------------------------------------------------------------------------
* What it is: a testbench as a designer builds one.  The op-amp is a
*   subcircuit (opamp): NMOS pair XM1/XM2 with the tail XM5,
*   PMOS mirror load XM3 (diode) / XM4, PMOS common-source second stage XM6
*   with a cascoded NMOS sink XM7/XM7C, Miller capacitor Cc with nulling
*   resistor Rz between the stages.  Bias: Ibias into the diode XMB1 (nbias);
*   the cascode bias ncas comes from a diode stack XMB2/XMB3 fed by a copy of
*   Ibias (XMB4, XMB5 mirror).  The testbench closes the loop with Rf/Rg
*   (gain 2), loads the output with CL, drives the input with "ac 1" and
*   carries analyses netloop never runs.
* Where the loop closes: out -> Rf -> fb (gate of XM1, the mirror side) ->
*   o1 -> XM6 -> out.  Plausible breaks: fb (driven by Rf, loads the gate of
*   XM1 and Rg), out (driven by XM6/XM7C drains with the Miller branch, loads
*   Rf and CL), xop.o1 (driven by XM2/XM4, loads XM6's gate and Rz).
* Expected loop character (expert probe at fb, expert/miller_tb.fb.sp): DC
*   loop gain about 61 dB, crossover about 14 MHz, phase margin about 80 deg,
*   gain margin about 38 dB; the Miller loop stays closed at fb and out.
* Process: the real SkyWater sky130 models (../sky130/process.spice).
* ---------------------------------------------------------------------------
.param vdd=1.8 vcm=0.9 cc=1p rz=2k cl=2p rf=20k rg=20k

.lib ../../sky130/process.spice tt

.subckt opamp inp inn out vdd vss ibias cc=1p rz=2k
* bias: Ibias in the diode XMB1, copied by XMB4 into the PMOS diode XMB5, whose
* copy XMB6 feeds the diode stack XMB2/XMB3 that sets the cascode gate ncas
XMB1 ibias ibias vss vss sky130_fd_pr__nfet_01v8 w=4 l=1
XMB4 pb ibias vss vss sky130_fd_pr__nfet_01v8 w=4 l=1
XMB5 pb pb vdd vdd sky130_fd_pr__pfet_01v8 w=8 l=1
XMB6 ncas pb vdd vdd sky130_fd_pr__pfet_01v8 w=8 l=1
XMB2 ncas ncas nmid vss sky130_fd_pr__nfet_01v8 w=4 l=1
XMB3 nmid nmid vss vss sky130_fd_pr__nfet_01v8 w=16 l=1
* first stage: NMOS pair, tail, PMOS mirror load
XM5 tail ibias vss vss sky130_fd_pr__nfet_01v8 w=8 l=1
XM1 d1 inn tail vss sky130_fd_pr__nfet_01v8 w=8 l=0.5
XM2 o1a inp tail vss sky130_fd_pr__nfet_01v8 w=8 l=0.5
XM3 d1 d1 vdd vdd sky130_fd_pr__pfet_01v8 w=8 l=1
XM4 o1a d1 vdd vdd sky130_fd_pr__pfet_01v8 w=8 l=1
Vprobe o1 o1a dc 0 ac 1
Iprobe 0 o1a dc 0 ac 0
* second stage: PMOS common source, cascoded NMOS sink
XM6 out o1 vdd vdd sky130_fd_pr__pfet_01v8 w=40 l=0.5
XM7 t7 ibias vss vss sky130_fd_pr__nfet_01v8 w=32 l=1
XM7C out ncas t7 vss sky130_fd_pr__nfet_01v8 w=32 l=0.5
* Miller compensation between the stages
Rz o1 cz {rz}
Cc cz out {cc}
.ends opamp

Vdd vdd 0 dc {vdd}
Vcm vcm 0 dc {vcm}
Vin inp 0 dc {vcm} ac 0
Ibias vdd ib dc 10u

Xop inp fb out vdd 0 ib opamp cc={cc} rz={rz}
Rf out fb {rf}
Rg fb vcm {rg}
CL out 0 {cl}

.end
