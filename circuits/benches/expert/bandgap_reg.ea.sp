Expert reference: bandgap_reg.cir broken at xreg.ea (ea)
* Written by hand for tests/circuits/test_benches.py: the bench bandgap_reg.cir with a Tian probe placed by an
* expert at xreg.ea.  Driver side (node v(xreg.ea_a)): the drains of ME2 and ME4.  Load side (node v(xreg.ea)): MPASS's gate.
* Every AC source of the bench is set to ac 0; the probe: v.xreg.vprobe (series, + on the load side) and i.xreg.iprobe (shunt into the driver side).
* vectors: a=v(xreg.ea_a) b=v(xreg.ea) series=v.xreg.vprobe shunt=i.xreg.iprobe
* ---------------------------------------------------------------------------
* What it is: a linear regulator block (reg) as a designer builds one from
*   other blocks.  Inside it, a bandgap reference block (bandgap) whose
*   amplifier is a block of its own (bgamp): three levels, top -> xreg ->
*   xbg -> xamp.
*   bgamp: low-threshold NMOS pair MA1/MA2, PMOS mirror load MA3 (diode) /
*     MA4, and a tail MTL mirrored (MAB) from MAT, a PMOS whose gate is the
*     amplifier's own output (self-biased: its bias current copies the core
*     current).  Its output is the port "out".
*   bandgap: the core PMOS mirror MP1/MP2/MP3 (gates pg = the amplifier's
*     output), diode D1 at va, R1 + 8 parallel diodes D2 at vb, R2 + D3 at
*     vbg (the reference, about 1.2 V); the amplifier forces va = vb.  A
*     start-up path (Rsu, MS2 senses vbg, MS1 pulls pg down while vbg is
*     low) that is off at the operating point.  Ports: vdd vss vbg pg.
*   reg: NMOS-input error amplifier ME1/ME2, its tail MTE mirrored (MEB)
*     from MET, a copy of the bandgap core current (MET's gate is the
*     bandgap's pg port, pbias here); PMOS mirror ME3 (diode) / ME4; the
*     output ea drives the PMOS pass device MPASS.  Ports: vin vout fb vss.
*   top: supply, the feedback divider R1/R2 from vout to fb, Cout with ESR,
*     a resistive load.  The regulation loop closes through xreg's ports.
* Where the loops close:
*   regulation: vout -> R1 -> fb -> xreg.ea (xreg.me2/me4) -> xreg.mpass ->
*     vout.  Plausible breaks: fb, vout, xreg.ea.
*   bandgap: xreg.xbg.pg (= xreg.pbias = xreg.xbg.xamp.out, one net with
*     three names; driven by the amplifier's MA2/MA4 drains, loads the
*     gates of the core mirror, the tail MAT, the regulator's MET) -> core
*     -> va, vb -> amplifier -> pg.  Plausible breaks: xreg.xbg.pg (as
*     xreg.xbg.xamp.out too), xreg.xbg.va, xreg.xbg.vb.
* Expected loop character (expert probes, expert/bandgap_reg.*.sp):
*   regulation loop at fb: DC loop gain about 71 dB, crossover about 290 kHz,
*   phase margin about 26 deg (a slow output pole from Cout against the light
*   load).  Bandgap loop: broken at pg (the amplifier's output) it is opened
*   whole (DC loop gain about 53 dB, phase margin about 49 deg); at vb the positive loop through va stays closed, so the opened
*   circuit has one right-half-plane pole (P = 1), and at va |T| stays below
*   0 dB (the negative loop through vb closed around it).
* Models: INVENTED level-1 MOS cards (../models/corners.lib) and an INVENTED
*   diode card below; not a real process.
* ---------------------------------------------------------------------------
.param vin=3.3 r1=100k r2=100k cout=1u resr=0.2 rload=240

.lib ../../models/corners.lib tt
* INVENTED junction diode for the bandgap core and INVENTED low-threshold NMOS for its amplifier's
* input pair (not a real process)
.model dbg d (is=1e-16 n=1 rs=10 cjo=50f)
.model nlv nmos (level=1 vto=0.2 kp=180u gamma=0.3 phi=0.7 lambda=0.06 tox=12n cgso=0.3n cgdo=0.3n cgbo=0.1n cj=0.6m cjsw=0.25n mj=0.5 mjsw=0.33 pb=0.8)

.subckt bgamp inp inn out vdd vss
* self-biased: MAT copies the core current (its gate is this amplifier's own output) into the tail mirror MAB/MTL
MAT nb out vdd vdd pch w=20u l=2u
MAB nb nb vss vss nch w=10u l=2u
MTL atail nb vss vss nch w=20u l=2u
MA1 am inp atail vss nlv w=40u l=1u
MA2 out inn atail vss nlv w=40u l=1u
MA3 am am vdd vdd pch w=10u l=2u
MA4 out am vdd vdd pch w=10u l=2u
.ends bgamp

.subckt bandgap vdd vss vbg pg
MP1 va pg vdd vdd pch w=20u l=2u
MP2 vb pg vdd vdd pch w=20u l=2u
MP3 vbg pg vdd vdd pch w=20u l=2u
D1 va vss dbg
R1 vb vc 11k
D2 vc vss dbg m=8
R2 vbg vd 112k
D3 vd vss dbg
Xamp vb va pg vdd vss bgamp
Cpg pg vdd 1p
* start-up: off once vbg is up
Rsu vdd su 1Meg
MS2 su vbg vss vss nch w=4u l=1u
MS1 pg su vss vss nch w=1u l=4u
.ends bandgap

.subckt reg vin vout fb vss
Xbg vin vss vbg pbias bandgap
MET nb pbias vin vin pch w=20u l=2u
MEB nb nb vss vss nch w=10u l=1u
MTE etail nb vss vss nch w=40u l=1u
ME1 em fb etail vss nch w=40u l=1u
ME2 ea_a vbg etail vss nch w=40u l=1u
ME3 em em vin vin pch w=20u l=1u
ME4 ea_a em vin vin pch w=20u l=1u
Vprobe ea ea_a dc 0 ac 1
Iprobe 0 ea_a dc 0 ac 0
MPASS vout ea vin vin pch w=4000u l=0.5u
.ends reg

Vsup vin 0 dc {vin}
Xreg vin vout fb 0 reg
R1 vout fb {r1}
R2 fb 0 {r2}
Cout vout cesr {cout}
Resr cesr 0 {resr}
Rload vout 0 {rload}
.nodeset v(xreg.pbias)=2.59 v(xreg.xbg.va)=0.64 v(xreg.xbg.vb)=0.64 v(xreg.vbg)=1.17 v(xreg.xbg.xamp.atail)=0.35 v(vout)=2.33 v(fb)=1.17 v(xreg.ea)=2.52
.end
