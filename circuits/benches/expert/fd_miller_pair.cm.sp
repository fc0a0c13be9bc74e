Expert reference: fd_miller_pair.cir broken at xamp.cm
* Written by hand for tests/circuits/test_benches.py: the bench fd_miller_pair.cir with a Tian probe placed by an
* expert at xamp.cm.  Driver side (node v(xamp.cm_a)): Rcm1 and Rcm2, the common-mode sense from both outputs.  Load side (node v(xamp.cm)): M10's gate.
* Every AC source of the bench is set to ac 0; the probe: a series source (+ on the load side) and a shunt source into the driver side.
* vectors: a=v(xamp.cm_a) b=v(xamp.cm) series=v.xamp.vprobe shunt=i.xamp.iprobe
* The bench: a two-stage fully differential Miller amplifier (subcircuit fdamp, instance Xamp) with CMFB (Rcm1/Rcm2 ->
* cm -> M10 -> cmfb, diode M12 -> M3/M4) in a closed loop through Rin/Rf; INVENTED level-1 models (../../models/corners.lib).
.param vdd=3.3 vcm=1.65 cc=1p rz=2k cl=2p rin=20k rf=20k rcm=200k

.lib ../../models/corners.lib tt

.subckt fdamp inp inn outp outn vcmref pbias vdd cc=1p rz=2k rcm=200k
M5 tail pbias vdd vdd pch w=20u l=1u
M1 o1p inp tail tail pch w=20u l=1u
M2 o1n inn tail tail pch w=20u l=1u
M3 o1p cmfb 0 0 nch w=10u l=1u
M4 o1n cmfb 0 0 nch w=10u l=1u
M6 outp o1p 0 0 nch w=20u l=1u
M7 outn o1n 0 0 nch w=20u l=1u
M8 outp pbias vdd vdd pch w=50u l=1u
M9 outn pbias vdd vdd pch w=50u l=1u
Rz1 o1p zp {rz}
Cc1 zp outp {cc}
Rz2 o1n zn {rz}
Cc2 zn outn {cc}
Rcm1 outp cm_a {rcm}
Rcm2 outn cm_a {rcm}
Vprobe cm cm_a dc 0 ac 1
Iprobe 0 cm_a dc 0 ac 0
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
Rf1 outp xn {rf}
Rf2 outn xp {rf}
CL1 outp 0 {cl}
CL2 outn 0 {cl}
.end
