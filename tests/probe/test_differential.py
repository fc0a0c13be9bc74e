"""The differential probe: modal bookkeeping, the break of a node pair, and T_dm / T_cm against closed forms in ngspice."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from netloop.analysis.return_ratio import middlebrook
from netloop.errors import ProbeError, UnknownNodeError
from netloop.netlist import parse_text, write_netlist
from netloop.probe import break_loop
from netloop.probe.differential import RUNS, break_pair, modal_currents, modal_voltages

from .conftest import probe_runs

# Behavioural fully differential loop (E/G sources, R, C). Per half k in (p, n):
#   DM stage: Thevenin e_k behind rs_k, e_p = KD (v_fn - v_fp), e_n = KD (v_fp - v_fn)
#   CMFB: current GMC v_cm drawn from each output; v_cm = GS ZS(s) (v_outp + v_outn), ZS = RSC / (1 + s RSC CS)
#   DM feedback sense: v_fk = GF ZF(s) v_outk, ZF = RF / (1 + s RF CF)
#   load: CL from each output to ground, RDL across the outputs
KD, GF, RF, CF = 50.0, 1e-3, 1e3, 1e-12
GMC, GS, RSC, CS = 0.5e-3, 0.5e-3, 1e3, 20e-12
RS, CL, RDL = 10e3, 10e-12, 100e3


def fd_netlist(rsp: float = RS, rsn: float = RS) -> str:
    return f"""behavioural fully differential loop
vref ref 0 dc 0.5
edp xdp 0 fn fp {KD}
edn xdn 0 fp fn {KD}
rsp xdp outp {rsp!r}
rsn xdn outn {rsn!r}
gcp outp 0 cm ref {GMC}
gcn outn 0 cm ref {GMC}
clp outp 0 {CL}
cln outn 0 {CL}
rdl outp outn {RDL}
gfp 0 fp outp 0 {GF}
gfn 0 fn outn 0 {GF}
rfp fp 0 {RF}
rfn fn 0 {RF}
cfp fp 0 {CF}
cfn fn 0 {CF}
gsp 0 cm outp 0 {GS}
gsn 0 cm outn 0 {GS}
rsc cm 0 {RSC}
csc cm 0 {CS}
.end
"""


DRIVERS = ("gcp,rsp", "gcn,rsn")  # the Thevenin resistor and the CMFB current source drive each output

# The modal maps of the module docstring, written out: voltages (v_d, v_c) = P (v_p, v_n),
# currents (i_d, i_c) = Q (i_p, i_n), Q = P^-T (the pair conserves power).
P = np.array([[1.0, -1.0], [0.5, 0.5]])
Q = np.array([[0.5, -0.5], [1.0, 1.0]])


def node_matrices(freq_hz: np.ndarray, rsp: float, rsn: float):
    """Va1, Vb1, Ib2 as 2x2 node matrices per frequency, by nodal analysis of the split circuit (derived by hand).

    Driver side a of node k: Norton current i_N = -K v_b behind admittance Ya = 1/rs_k, with
    K = KD ZF GF Ya Jd + GMC GS ZS Jc (Jd = [[1,-1],[-1,1]], Jc = [[1,1],[1,1]]); load side b:
    Yb = s CL 1 + Jd / RDL. With M = Ya + Yb + K, Kirchhoff at b gives
      series run (v_b - v_a = v_s):  M v_b = Ya v_s       -> Vb1 = M^-1 Ya, Va1 = Vb1 - 1
      shunt run (i_s into a, v_a = v_b): M v_b = i_s, i_b = Yb v_b -> Ib2 = Yb M^-1
    """
    s = 2j * np.pi * np.asarray(freq_hz, dtype=float)[:, None, None]
    jd = np.array([[1.0, -1.0], [-1.0, 1.0]])
    jc = np.array([[1.0, 1.0], [1.0, 1.0]])
    ya = np.diag([1.0 / rsp, 1.0 / rsn])[None]
    zf = RF / (1 + s * RF * CF)
    zs = RSC / (1 + s * RSC * CS)
    k = KD * zf * GF * (ya @ jd) + GMC * GS * zs * jc
    yb = s * CL * np.eye(2) + jd / RDL
    m_inv = np.linalg.inv(ya + yb + k)
    vb1 = m_inv @ ya
    return vb1 - np.eye(2), vb1, yb @ m_inv


def modal_closed_form(freq_hz, rsp, rsn):
    """T_dm, T_cm and the coupling |R_cd/R_dd|, |R_dc/R_cc| from the node matrices, by the modal definitions."""
    va, vb, ib = node_matrices(freq_hz, rsp, rsn)
    p_inv, q_inv = np.linalg.inv(P), np.linalg.inv(Q)
    va_m, vb_m, ib_m = P @ va @ p_inv, P @ vb @ p_inv, Q @ ib @ q_inv
    t = [-(va_m[:, k, k] + ib_m[:, k, k]) / (vb_m[:, k, k] + ib_m[:, k, k]) for k in (0, 1)]
    returned = -(va_m + P @ ib @ p_inv)  # both in the voltage frame
    dm_to_cm = np.abs(returned[:, 1, 0]) / np.abs(returned[:, 0, 0])
    cm_to_dm = np.abs(returned[:, 0, 1]) / np.abs(returned[:, 1, 1])
    return t[0], t[1], dm_to_cm, cm_to_dm


def pair_runs(simulator, pair, fstart_hz=1e2, fstop_hz=1e10, points=10):
    """The four runs of a PairProbe on one operating point: frequencies and PairQuantities."""
    from netloop.sim import AcRun, AcSweep, SimJob  # noqa: PLC0415

    sweeps = (AcSweep("dec", points, fstart_hz, fstop_hz),)
    job = SimJob(
        netlist=write_netlist(pair.netlist),
        runs=tuple(AcRun(name, ac, sweeps) for name, ac in pair.runs),
        save=pair.save,
        excitable=pair.sources,
    )
    result = simulator.run(job)
    return result.runs[0].freq_hz, pair.quantities({r.name: r.vectors for r in result.runs})


def tian(q):
    return -(q.va1 + q.ib2) / (q.vb1 + q.ib2)


@settings(max_examples=50, deadline=None, derandomize=True)
@given(st.lists(st.floats(-1e3, 1e3, allow_nan=False), min_size=4, max_size=4))
def test_modal_pairs_conserve_power(x):
    """v_p i_p + v_n i_n equals v_d i_d + v_c i_c for the modal maps (the pair is power-conserving)."""
    vp, vn, ip, i_n = x
    vd, vc = modal_voltages(vp, vn)
    idd, ic = modal_currents(ip, i_n)
    assert complex(vd * idd + vc * ic).real == pytest.approx(vp * ip + vn * i_n, rel=1e-12, abs=1e-9)


def test_each_run_is_a_unit_excitation_of_one_modal_source():
    """The four runs excite exactly one modal source each with unit amplitude (the table of the module docstring)."""
    pair = break_pair(parse_text(fd_netlist()), "outp", "outn", drivers=DRIVERS)
    vsp, vsn, isp, isn = pair.sources
    excitation = {}
    for name, ac in pair.runs:
        vd, vc = modal_voltages(ac[vsp], ac[vsn])
        idd, ic = modal_currents(ac[isp], ac[isn])
        excitation[name] = (complex(vd), complex(vc), complex(idd), complex(ic))
    assert tuple(excitation) == RUNS
    assert excitation == {
        "dm-series": (1, 0, 0, 0),
        "dm-shunt": (0, 0, 1, 0),
        "cm-series": (0, 1, 0, 0),
        "cm-shunt": (0, 0, 0, 1),
    }


def test_break_pair_splits_both_nodes_and_keeps_the_input():
    """Both nodes get their own series and shunt source and driver node, and the given netlist is not modified."""
    netlist = parse_text(fd_netlist())
    before = write_netlist(netlist)
    pair = break_pair(netlist, "OUTP", "outn", drivers=DRIVERS)
    assert write_netlist(netlist) == before
    assert pair.nodes == ("outp", "outn")
    assert (pair.p.side_a, pair.p.side_b, pair.n.side_a, pair.n.side_b) == ("outp_drive", "outp", "outn_drive", "outn")
    assert len(set(pair.sources)) == 4
    assert pair.p.netlist is pair.netlist and pair.n.netlist is pair.netlist
    by_name = {e.key: e for e in pair.netlist.elements}
    assert by_name["rsp"].nodes == ("xdp", "outp_drive") and by_name["gcp"].nodes[0] == "outp_drive"
    assert by_name["rsn"].nodes == ("xdn", "outn_drive") and by_name["gcn"].nodes[0] == "outn_drive"
    assert by_name["rdl"].nodes == ("outp", "outn")  # the load across the pair stays on the load sides
    assert not any("loops through its load side" in w for w in pair.warnings)


def test_quantities_need_all_four_runs():
    """Modal quantities from fewer than the four runs are a ProbeError naming the runs needed and the ones missing."""
    pair = break_pair(parse_text(fd_netlist()), "outp", "outn", drivers=DRIVERS)
    with pytest.raises(ProbeError) as info:
        pair.quantities({"dm-series": {}, "cm-series": {}})
    assert str(info.value) == "the differential probe needs the runs dm-series, dm-shunt, cm-series, cm-shunt; missing dm-shunt, cm-shunt"


def test_break_pair_refuses_one_node_twice_and_unknown_nodes():
    """The same node twice is a ProbeError and an unknown node an UnknownNodeError, before any simulation."""
    netlist = parse_text(fd_netlist())
    with pytest.raises(ProbeError, match="two different nodes"):
        break_pair(netlist, "outp", "OUTP")
    with pytest.raises(UnknownNodeError):
        break_pair(netlist, "outp", "outq")


@pytest.mark.ngspice
def test_symmetric_pair_gives_the_half_circuit_closed_forms(simulator):
    """For matched halves T_dm and T_cm equal the half circuits' closed-form return ratios to 1e-9, with no cross-mode signal."""
    pair = break_pair(parse_text(fd_netlist()), "outp", "outn", drivers=DRIVERS)
    f, q = pair_runs(simulator, pair)
    s = 2j * np.pi * f
    zf = RF / (1 + s * RF * CF)
    zs = RSC / (1 + s * RSC * CS)
    # DM half circuit (v_outn = -v_outp, RDL looks like RDL/2 to ground): the Thevenin stage's
    # controlled current 2 KD GF ZF / RS into 1/RS + s CL + 2/RDL (circuit theory, by hand)
    t_dm = 2 * KD * GF * zf / RS / (1 / RS + s * CL + 2 / RDL)
    # CM half circuit (v_outn = v_outp, no current in RDL): 2 GMC GS ZS into 1/RS + s CL (by hand)
    t_cm = 2 * GMC * GS * zs / (1 / RS + s * CL)
    keep = np.abs(t_cm) > 1e-5  # above the numerical floor of the unit injection (netloop.analysis.DEFAULT_FLOOR_DB)
    assert keep.sum() > 40
    np.testing.assert_allclose(tian(q.differential)[keep], t_dm[keep], rtol=1e-9)
    np.testing.assert_allclose(tian(q.common)[keep], t_cm[keep], rtol=1e-9)
    for mode, t in ((q.differential, t_dm), (q.common, t_cm)):  # Middlebrook (1975) with i_a2 = i_b2 - 1 gives the same T
        np.testing.assert_allclose(middlebrook(mode.va1, mode.vb1, mode.ia2, mode.ib2)[keep], t[keep], rtol=1e-9)
    assert np.max(q.dm_to_cm[keep]) < 1e-9 and np.max(q.cm_to_dm[keep]) < 1e-9  # -180 dB: rounding only


@pytest.mark.ngspice
def test_mismatched_pair_matches_the_nodal_analysis(simulator):
    """With a 10 % mismatched output resistor, T_dm, T_cm and both coupling ratios equal the by-hand nodal analysis."""
    rsn = 1.1 * RS
    pair = break_pair(parse_text(fd_netlist(rsn=rsn)), "outp", "outn", drivers=DRIVERS)
    f, q = pair_runs(simulator, pair)
    t_dm, t_cm, dm_to_cm, cm_to_dm = modal_closed_form(f, RS, rsn)
    keep = np.abs(t_cm) > 1e-5
    np.testing.assert_allclose(tian(q.differential)[keep], t_dm[keep], rtol=1e-9)
    np.testing.assert_allclose(tian(q.common)[keep], t_cm[keep], rtol=1e-9)
    np.testing.assert_allclose(q.dm_to_cm[keep], dm_to_cm[keep], rtol=1e-7)
    np.testing.assert_allclose(q.cm_to_dm[keep], cm_to_dm[keep], rtol=1e-7)
    assert np.max(dm_to_cm) > 1e-2  # a real coupling, well above the -40 dB threshold


@pytest.mark.ngspice
def test_single_ended_break_of_one_output_still_works(simulator):
    """break_loop at outp alone (the n side closed) gives T = 1/S_pp - 1 of the same nodal analysis, unchanged by the pair code."""
    rsn = 1.1 * RS
    probed = break_loop(parse_text(fd_netlist(rsn=rsn)), "outp", driver=DRIVERS[0])
    f, q, _ = probe_runs(simulator, probed, 1e2, 1e10, 10)
    _, vb, ib = node_matrices(f, RS, rsn)
    # a break at p alone is the pair with the n probe at zero: S_pp of the node matrices (Tian et al. 2001, 1/(1+T) = vb1 + ib2)
    t = 1.0 / (vb[:, 0, 0] + ib[:, 0, 0]) - 1.0
    keep = np.abs(t) > 1e-5
    np.testing.assert_allclose(tian(q)[keep], t[keep], rtol=1e-9)


def test_coupling_of_a_mode_with_no_returned_signal():
    """A mode that returns nothing gives coupling 0 when the other mode returns nothing too, and inf when it does."""
    from netloop.probe.differential import PairQuantities  # noqa: PLC0415

    eye = np.eye(2, dtype=complex)[:, :, None] * np.ones(2)
    va1 = -eye.copy()  # unit injection, nothing returned: R = -(V_a1 + I_b2) = 1 - 1 = 0 on the diagonal
    ib2 = eye.copy()
    va1[1, 0, 1] = -0.5  # at the second frequency the DM run returns a CM signal only
    q = PairQuantities(va1, va1 + eye, ib2)
    np.testing.assert_array_equal(q.dm_to_cm, [0.0, np.inf])
    np.testing.assert_array_equal(q.cm_to_dm, [0.0, 0.0])


def test_a_pair_broken_inside_an_instance_names_the_one_copy_that_holds_both_probes():
    """Breaking both nodes of a pair inside instance xamp copies its subcircuit for the first probe, and that copy again
    for the second: PairProbe.copied_subcircuits names the original and the final copy once (a copy of a copy counts
    once), the instance reads the final copy, and it holds both halves' probes (by construction of the break)."""
    from pathlib import Path

    from netloop.netlist import parse_file

    bench = Path(__file__).resolve().parents[2] / "circuits" / "benches" / "fd_miller_pair.cir"
    pair = break_pair(parse_file(bench), "xamp.o1p", "xamp.o1n")
    ((original, final),) = pair.copied_subcircuits
    assert original == "fdamp" and pair.p.copied_subcircuits == (("fdamp", pair.n.copied_subcircuits[0][0]),)
    assert pair.n.copied_subcircuits[0][1] == final
    assert pair.netlist.element("xamp").model.lower() == final
    held = {e.name.lower() for e in pair.netlist.subcircuit(final).elements}
    assert {pair.p.series_source, pair.n.series_source} == {"v.xamp.vnl_series", "v.xamp.vnl_series_2"}  # ngspice's names
    assert {"vnl_series", "vnl_series_2"} <= held

    # one node inside the instance, the other at the top: the first break's copy is the final one
    lopsided = break_pair(parse_file(bench), "xamp.o1p", "outn")
    assert lopsided.n.copied_subcircuits == () and lopsided.copied_subcircuits == (("fdamp", "fdamp_broken_in_xamp"),)
    assert lopsided.netlist.element("xamp").model.lower() == "fdamp_broken_in_xamp"
