Expert reference: fd_cap_amp.cir broken at the pair outp,outn (pair-out)
* Written by hand for tests/circuits/test_pair_benches.py: the bench fd_cap_amp.cir with a Tian probe at each node of the
* pair outp,outn, placed by an expert.  Driver side: the drains of M2 and M4 (M1 and M3).  Load side: Rcm1, Cf2, the pseudo-resistor's Mpd, the reset switch Mr2's source, CL1 (Rcm2, Cf1, Mpb, Mr1, CL2).
* Every AC source of the bench is set to ac 0; each node's probe: a series source (+ on the load side) and a shunt
* current source into the driver side; the four modal runs (Hurst and Lewis 1995) excite them.
* vectors: ap=v(outp_a) bp=v(outp) an=v(outn_a) bn=v(outn) seriesp=vprobep shuntp=iprobep seriesn=vproben shuntn=iproben
* ---------------------------------------------------------------------------
* What it is: the amplifying phase of a switched-capacitor gain stage as a
*   testbench holds it: a fully differential amplifier closed with input
*   capacitors Cs1/Cs2 and feedback capacitors Cf1/Cf2 (gain Cs/Cf = 2).
*   Amplifier: NMOS pair M1/M2 (tail M5 from the bias diode Mb), PMOS loads
*   M3/M4 whose gates are the common-mode control cmfb; CMFB: Rcm1/Rcm2
*   sense cm, NMOS pair M6 (cm) / M7 (vcmref) with tail M8, PMOS diode M9 at
*   cmfb.  Each Cf has a pseudo-resistor across it for the DC bias of the
*   amplifier's inputs (two diode-connected PMOS back to back, Mpa/Mpb and
*   Mpc/Mpd: teraohms at this operating point), and a reset switch (Mr1,
*   Mr2, off: gate at 0 V) whose drain sits on the amplifier's input.  The
*   input switches Ms1/Ms2 are on (gate at vdd).
* Where the loops close:
*   differential mode: outn -> Cf1 (with the pseudo-resistor and the off
*     switch Mr1) -> xp -> M1 -> outn, and outp -> Cf2 -> xn -> M2 -> outp;
*     the expert breaks the pair xp/xn or outp/outn, or one node: xp
*     (driven by Cf1 and the pseudo-resistor from outn; the off switch Mr1
*     is only a tiny conductance to outn), outn (driven by M1/M3).
*   common mode: outp/outn -> Rcm1/Rcm2 -> cm -> M6 -> ctail -> M7 -> cmfb
*     (the diode M9) -> M3/M4 -> outn/outp.  Plausible breaks: cm, cmfb.
* Expected loop character (expert probes, expert/fd_cap_amp.*.sp): common
*   mode at cm: DC loop gain about 39 dB, crossover about 18 MHz, phase
*   margin about 61 deg; every break fits the same least-damped closed-loop
*   pair (about 28 MHz, damping 0.63).  At xp the off switch Mr1 is only a
*   teraohm path: the expert puts it with the feedback network or with the
*   load, and T is the same to a part in a million.
* Models: INVENTED level-1 cards (../models/corners.lib), not a real process.
* ---------------------------------------------------------------------------
.param vdd=3.3 vcm=1.65 cs=2p cf=1p rcm=500k cl=1p

.lib ../../models/corners.lib tt

Vdd vdd 0 dc {vdd}
Vphi phi 0 dc {vdd}
Vrst rst 0 dc 0
Vcmref vcmref 0 dc {vcm}
Vinp inp 0 dc {vcm} ac 0
Vinn inn 0 dc {vcm} ac 0

* bias and amplifier
Ibias vdd nbias dc 20u
Mb nbias nbias 0 0 nch w=10u l=1u
M5 tail nbias 0 0 nch w=20u l=1u
M1 outn_a xp tail 0 nch w=20u l=1u
M2 outp_a xn tail 0 nch w=20u l=1u
M3 outn_a cmfb vdd vdd pch w=20u l=1u
M4 outp_a cmfb vdd vdd pch w=20u l=1u

* common-mode feedback
Rcm1 outp cm {rcm}
Rcm2 outn cm {rcm}
M8 ctail nbias 0 0 nch w=10u l=1u
M6 vdd cm ctail 0 nch w=10u l=1u
M7 cmfb vcmref ctail 0 nch w=10u l=1u
M9 cmfb cmfb vdd vdd pch w=10u l=1u

* input switches (on) and input capacitors
Ms1 sp phi inp 0 nch w=10u l=0.5u
Ms2 sn phi inn 0 nch w=10u l=0.5u
Cs1 sp xp {cs}
Cs2 sn xn {cs}

* feedback capacitors, pseudo-resistors across them, reset switches (off)
Cf1 outn xp {cf}
Mpa pm1 pm1 xp xp pch w=2u l=4u
Mpb pm1 pm1 outn outn pch w=2u l=4u
Mr1 xp rst outn 0 nch w=2u l=0.5u
Cf2 outp xn {cf}
Mpc pm2 pm2 xn xn pch w=2u l=4u
Mpd pm2 pm2 outp outp pch w=2u l=4u
Mr2 xn rst outp 0 nch w=2u l=0.5u

* the expert's probes
Vprobep outp outp_a dc 0 ac 0
Iprobep 0 outp_a dc 0 ac 0
Vproben outn outn_a dc 0 ac 0
Iproben 0 outn_a dc 0 ac 0

* loads
CL1 outp 0 {cl}
CL2 outn 0 {cl}
.end
