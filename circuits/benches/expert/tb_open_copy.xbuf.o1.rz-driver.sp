Expert reference: tb_open_copy.cir broken at xbuf.o1 (xbuf.o1.rz-driver)
* Written by hand for tests/circuits/test_benches.py: the bench tb_open_copy.cir with a Tian probe placed by an
* expert at xbuf.o1.  Driver side (node v(xbuf.o1a)): the drains of M2 and M4, and Rz (the Miller branch: its loop is opened).  Load side (node v(xbuf.o1)): M6's gate.
* The definition ota is copied as ota_probed for Xbuf alone, with the probe inside.
* Every AC source of the bench is set to ac 0; the probe: v.xbuf.vprobe (series, + on the load side) and i.xbuf.iprobe (shunt into the driver side).
* vectors: a=v(xbuf.o1a) b=v(xbuf.o1) series=v.xbuf.vprobe shunt=i.xbuf.iprobe
* ---------------------------------------------------------------------------
* What it is: a testbench as it grows on a designer's desk.  The Miller
*   op-amp block (ota: NMOS pair M1/M2, tail M5, PMOS mirror M3/M4, PMOS
*   common-source M6 with sink M7, Miller Cc with Rz; bias diode MB fed by
*   the testbench's Ibias) is placed twice: Xbuf as a unity-gain buffer (the
*   loop under test), and Xol open loop, both inputs on DC sources, its
*   output only loaded by Cl2 -- left there from measuring the open-loop
*   gain.  No feedback closes around Xol: its output sits near a rail and
*   only its own Miller branch (o1 -> M6 -> out -> Cc/Rz -> o1) is a loop.
* Where the loops close:
*   Xbuf: out -> (gate of xbuf.m1) -> xbuf.o1 -> xbuf.m6 -> out.  Plausible
*     breaks: out (driven by xbuf.m6/m7 with the Miller branch, loads the
*     gate of xbuf.m1 and Cl1), xbuf.o1 (driven by xbuf.m2/m4, loads
*     xbuf.m6's gate and Rz).
*   Xol: only its Miller branch, around xol.o1 and olout (no global loop).
* Expected loop character (expert probe at out, expert/tb_open_copy.out.sp):
*   DC loop gain about 83 dB, crossover about 45 MHz, phase margin about 64
*   deg, gain margin about 45 dB (ngspice .pz: dominant pair near 64 MHz,
*   damping 0.68).  The copy's Miller loop (expert probe at xol.o1 with Rz on
*   the driver side) peaks near 14 dB although its output sits near ground.
* Models: INVENTED level-1 cards (../models/corners.lib), not a real process.
* ---------------------------------------------------------------------------
.param vdd=3.3 vcm=1.65

.lib ../../models/corners.lib tt

.subckt ota_probed inp inn out vdd vss ibias cc=1p rz=2k
MB ibias ibias vss vss nch w=10u l=1u
M5 tail ibias vss vss nch w=20u l=1u
M1 d1 inn tail vss nch w=20u l=1u
M2 o1a inp tail vss nch w=20u l=1u
M3 d1 d1 vdd vdd pch w=20u l=1u
M4 o1a d1 vdd vdd pch w=20u l=1u
Vprobe o1 o1a dc 0 ac 1
Iprobe 0 o1a dc 0 ac 0
M6 out o1 vdd vdd pch w=80u l=1u
M7 out ibias vss vss nch w=50u l=1u
Rz o1a cz {rz}
Cc cz out {cc}
.ends ota_probed

.subckt ota inp inn out vdd vss ibias cc=1p rz=2k
MB ibias ibias vss vss nch w=10u l=1u
M5 tail ibias vss vss nch w=20u l=1u
M1 d1 inn tail vss nch w=20u l=1u
M2 o1 inp tail vss nch w=20u l=1u
M3 d1 d1 vdd vdd pch w=20u l=1u
M4 o1 d1 vdd vdd pch w=20u l=1u
M6 out o1 vdd vdd pch w=80u l=1u
M7 out ibias vss vss nch w=50u l=1u
Rz o1 cz {rz}
Cc cz out {cc}
.ends ota

Vdd vdd 0 dc {vdd}
Vin in 0 dc {vcm} ac 0
Vol1 olp 0 dc {vcm}
Vol2 oln 0 dc {vcm}
Ib1 vdd ib1 dc 20u
Ib2 vdd ib2 dc 20u

* the loop under test: a unity-gain buffer
Xbuf in out out vdd 0 ib1 ota_probed cc=1.2p rz=1.5k
Cl1 out 0 2p

* the open-loop copy (no feedback)
Xol olp oln olout vdd 0 ib2 ota cc=1.2p rz=1.5k
Cl2 olout 0 2p

.end
