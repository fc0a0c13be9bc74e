Expert reference: ldo_cc_out.cir broken at ea (ea.rz-driver)
* Written by hand for tests/circuits/test_benches.py: the bench ldo_cc_out.cir with a Tian probe placed by an
* expert at ea.  Driver side (node v(ea_a)): the drains of M2 and M4, and Rz (the Miller branch: its loop through MP is opened too).  Load side (node v(ea)): MP's gate.
* Every AC source of the bench is set to ac 0; the probe: vprobe (series, + on the load side) and iprobe (shunt into the driver side).
* vectors: a=v(ea_a) b=v(ea) series=vprobe shunt=iprobe
* ---------------------------------------------------------------------------
* What it is: an on-chip LDO without an external output capacitor.  Error
*   amplifier: NMOS pair M1/M2 (tail M5 from the bias diode MB), PMOS mirror
*   load M3 (diode) / M4; its output ea drives the gate of the PMOS pass
*   device MP.  Compensation: the Miller capacitor Cc with Rz from the error
*   amplifier's output ea to the regulated output vout, around the pass
*   device (pole splitting between ea and vout).  Divider R1/R2 to fb, small
*   on-chip CL, a 1 mA load Iload.  vref comes from an ideal source.
* Where the loop closes: vout -> R1 -> fb (gate of M1, the mirror side: the
*   non-inverting input) -> ea -> MP -> vout.  Plausible breaks: fb (driven
*   by R1, loads M1's gate and R2), ea (driven by the drains of M2 and M4,
*   loads MP's gate and the Cc/Rz branch), vout (driven by MP's drain, loads
*   R1, Rz/Cc, CL and Iload).  The Cc branch is a loop of its own through
*   the pass device (ea -> MP -> vout -> Cc -> ea).
* Expected loop character (expert probe at fb, expert/ldo_cc_out.fb.sp): DC
*   loop gain about 94 dB, crossover about 16 MHz, phase margin about 87 deg,
*   gain margin about 11 dB.  At vout with Cc on the load side the Cc branch
*   stays closed and T differs (phase margin about 39 deg); the closed-loop
*   poles are the same (ngspice .pz: dominant pair near 46 MHz).
* Models: INVENTED level-1 cards (../models/corners.lib), not a real process.
* ---------------------------------------------------------------------------
.param vin=3.3 vref=1.2 cc=2p rz=5k cl=20p iload=1m r1=100k r2=100k ibias=10u

.lib ../../models/corners.lib tt

Vin vin 0 dc {vin}
Vref ref 0 dc {vref}
Ibias vin nb dc {ibias}

MB nb nb 0 0 nch w=10u l=1u
M5 tail nb 0 0 nch w=20u l=1u
M1 d1 fb tail 0 nch w=40u l=1u
M2 ea_a ref tail 0 nch w=40u l=1u
M3 d1 d1 vin vin pch w=20u l=1u
M4 ea_a d1 vin vin pch w=20u l=1u
Vprobe ea ea_a dc 0 ac 1
Iprobe 0 ea_a dc 0 ac 0

MP vout ea vin vin pch w=2000u l=0.5u
Rz ea_a cz {rz}
Cc cz vout {cc}

R1 vout fb {r1}
R2 fb 0 {r2}
CL vout 0 {cl}
Iload vout 0 dc {iload}
.end
