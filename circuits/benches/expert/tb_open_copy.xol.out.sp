Expert reference: tb_open_copy.cir broken at xol.out (xol.out)
* Written by hand for tests/circuits/test_benches.py: the bench tb_open_copy.cir with a Tian probe placed by an
* expert at xol.out.  Driver side (node v(xol.outa)): the drains of M6 and M7 inside the copy.  Load side (node v(olout)): Cc (the Miller branch back to o1) and the copy's pin out (Cl2 at the top).
* The definition ota is copied as ota_probed for Xol alone, with the probe inside; ngspice names the net out by its outer name, olout.
* Every AC source of the bench is set to ac 0; the probe: v.xol.vprobe (series, + on the load side) and i.xol.iprobe (shunt into the driver side).
* vectors: a=v(xol.outa) b=v(olout) series=v.xol.vprobe shunt=i.xol.iprobe
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
M2 o1 inp tail vss nch w=20u l=1u
M3 d1 d1 vdd vdd pch w=20u l=1u
M4 o1 d1 vdd vdd pch w=20u l=1u
M6 outa o1 vdd vdd pch w=80u l=1u
M7 outa ibias vss vss nch w=50u l=1u
Vprobe out outa dc 0 ac 1
Iprobe 0 outa dc 0 ac 0
Rz o1 cz {rz}
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
Xbuf in out out vdd 0 ib1 ota cc=1.2p rz=1.5k
Cl1 out 0 2p

* the open-loop copy (no feedback)
Xol olp oln olout vdd 0 ib2 ota_probed cc=1.2p rz=1.5k
Cl2 olout 0 2p

.end
