"""Both loops of a fully differential circuit through real ngspice: closed forms, coupling, the demo amplifier, the CLI."""

from __future__ import annotations

import json
import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from netloop.cli.main import main
from netloop.jobs.measure import Sweep
from netloop.jobs.measure_pair import COUPLING_THRESHOLD_DB, measure_pair
from netloop.probe.differential import RUNS
from netloop.sim import default_simulator

pytestmark = pytest.mark.ngspice

CIRCUITS = Path(__file__).resolve().parents[2] / "circuits"

# Behavioural fully differential loop with Norton outputs (G sources, R, C), values in SI units.
# Per output k: current GMD/2 (v_fk - v_fj) + GMC v_cm drawn from out_k into RO || CL; RDL across the outputs.
# DM sense v_fk = GF ZF(s) v_outk, ZF = RF / (1 + s RF CF); CM sense v_cm = GS ZS(s) (v_outp + v_outn), ZS = RSC / (1 + s RSC CS).
GMD, GMC, RO, CL, RDL = 1e-3, 0.2e-3, 100e3, 10e-12, 200e3
GF, RF, CF = 1e-3, 1e3, 1e-12
GS, RSC, CS = 0.5e-3, 1e3, 0.1e-9


def norton_netlist(ron: float = RO) -> str:
    return f"""behavioural fully differential loop, Norton outputs
vref ref 0 dc 0.5
gdp outp 0 fp fn {GMD / 2}
gdn outn 0 fn fp {GMD / 2}
gcp outp 0 cm ref {GMC}
gcn outn 0 cm ref {GMC}
rop outp 0 {RO}
ron outn 0 {ron!r}
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


def closed_forms(freq_hz):
    """T_dm, T_cm of the matched Norton loop, derived by hand on the half circuits (circuit theory).

    DM half (v_outn = -v_outp): the output current GMD ZF GF v_outp into RO || RDL/2 || CL:
        T_dm = GMD GF ZF Zd,  Zd = (RO || RDL/2) / (1 + s (RO || RDL/2) CL)
    CM half (v_outn = v_outp, no current in RDL): v_cm = 2 GS ZS v_outp, current GMC v_cm into RO || CL:
        T_cm = 2 GMC GS ZS Zc,  Zc = RO / (1 + s RO CL)
    """
    s = 2j * np.pi * np.asarray(freq_hz, dtype=float)
    rd = RO * (RDL / 2) / (RO + RDL / 2)
    zd, zc = rd / (1 + s * rd * CL), RO / (1 + s * RO * CL)
    zf, zs = RF / (1 + s * RF * CF), RSC / (1 + s * RSC * CS)
    return GMD * GF * zf * zd, 2 * GMC * GS * zs * zc


class Recording:
    """The default ngspice simulator, keeping every job it ran."""

    def __init__(self):
        self.inner = default_simulator()
        self.jobs = []
        self.backend = getattr(self.inner, "backend", "")

    def run(self, job):
        self.jobs.append(job)
        return self.inner.run(job)

    def operating_point(self, netlist):
        return self.inner.operating_point(netlist)

    def close(self):
        close = getattr(self.inner, "close", None)
        if close is not None:
            close()


@pytest.fixture(scope="module")
def simulator():
    sim = Recording()
    yield sim
    sim.close()


def test_matched_loop_gives_the_closed_forms_from_one_four_run_job(simulator, tmp_path):
    """measure_pair's T_dm and T_cm equal the half-circuit closed forms to 1e-9, every job holds the four runs, and coupling is below -100 dB."""
    path = tmp_path / "fd.cir"
    path.write_text(norton_netlist())
    simulator.jobs.clear()
    result = measure_pair(path, "outp,outn", simulator=simulator)
    assert simulator.jobs and all(tuple(r.name for r in job.runs) == RUNS for job in simulator.jobs)
    for lr, t in zip((result.differential, result.common), closed_forms(result.differential.analysis.freq_hz)):
        keep = np.abs(t) > 1e-5  # above the numerical floor (netloop.analysis.DEFAULT_FLOOR_DB)
        np.testing.assert_allclose(lr.analysis.t[keep], t[keep], rtol=1e-9)
    assert np.array_equal(result.differential.analysis.freq_hz, result.common.analysis.freq_hz)
    assert result.stable and result.passed
    assert max(result.coupling.dm_to_cm_db, result.coupling.cm_to_dm_db) < -100.0  # matched halves: zero by mirror symmetry (Hurst and Lewis, 1995); -100 dB is our numerical bound
    assert not result.coupling.coupled
    assert result.coupling.dm_band_hz == max(c.freq_hz for c in result.differential.analysis.gain_crossovers)
    assert not any("couple" in w for w in result.differential.warnings)


def test_mismatched_output_resistor_is_reported_as_coupling(simulator, tmp_path):
    """A 20 % mismatch of one output resistor lifts the coupling above the -40 dB threshold and both modes warn of it."""
    path = tmp_path / "fd_mismatch.cir"
    path.write_text(norton_netlist(ron=1.2 * RO))
    result = measure_pair(path, ("outp", "outn"), simulator=simulator)
    # -40 dB: our threshold, common practice for "negligible" (1 % of the mode's own returned signal)
    assert result.coupling.threshold_db == COUPLING_THRESHOLD_DB == -40.0
    assert max(result.coupling.dm_to_cm_db, result.coupling.cm_to_dm_db) > -40.0
    assert result.coupling.coupled
    for lr in result.modes.values():
        assert any("couple" in w for w in lr.warnings)


def test_pair_inside_one_instance_gives_the_same_closed_forms(simulator):
    """A pair broken inside instance xa of a subcircuit gives the closed forms, and the copy of the definition is reported once."""
    lines = norton_netlist().splitlines()[1:-1]
    text = "two instances\n.subckt fdamp\n" + "\n".join(lines) + "\n.ends\nxa fdamp\nxb fdamp\n.end\n"
    result = measure_pair(text, "xa.outp,xa.outn", simulator=simulator)
    for lr, t in zip(result.modes.values(), closed_forms(result.differential.analysis.freq_hz)):
        keep = np.abs(t) > 1e-5
        np.testing.assert_allclose(lr.analysis.t[keep], t[keep], rtol=1e-9)
    (original, copy), = result.differential.breaks.copied_subcircuits
    assert original == "fdamp" and copy != "fdamp"


def _pz(deck: Path) -> list[complex]:
    run = subprocess.run(["ngspice", "-b", str(deck)], cwd=deck.parent, capture_output=True, text=True, timeout=120)
    out = run.stdout + run.stderr
    poles = [complex(float(a), float(b)) for a, b in re.findall(r"pole\(\d+\) = (\S+),\s*(\S+)", out)]
    assert poles, out[-1500:]
    return poles


def _pz_poles(tmp_path: Path) -> np.ndarray:
    """ngspice's own pole-zero analysis of the closed demo amplifier (rad/s): differential drive, then common-mode drive.

    ngspice's .pz gives the poles of one input-output transfer; the modes of a symmetric circuit
    cancel from the other mode's transfer, so both drives are needed to see the poles of both loops.
    """
    shutil.copytree(CIRCUITS / "models", tmp_path / "models")
    text = (CIRCUITS / "fd_amp_cmfb.cir").read_text()
    body = text[: text.lower().rindex(".end")]
    poles = []
    for name, drive, analysis in (
        ("dm", None, "pz inp inn outp outn vol pol"),
        ("cm", ("Vinn inn 0 dc {vcm} ac 1 180", "Vinn inn inp dc 0"), "pz inp 0 outp 0 vol pol"),
    ):
        deck_text = body if drive is None else body.replace(*drive)
        assert drive is None or drive[1] in deck_text
        deck = tmp_path / f"fd_pz_{name}.cir"
        deck.write_text(deck_text + f".control\n{analysis}\nprint all\nquit\n.endc\n.end\n")
        poles += _pz(deck)
    return np.array(poles)


def test_demo_amplifier_modes_agree_with_ngspice_pole_zero(simulator, tmp_path):
    """On circuits/fd_amp_cmfb.cir both loops are measured and stable, and their closed-loop poles are poles of ngspice's .pz."""
    result = measure_pair(CIRCUITS / "fd_amp_cmfb.cir", "outp,outn", simulator=simulator)
    assert result.stable
    dm, cm = result.differential.analysis, result.common.analysis
    assert dm.margins.phase_margin_deg > cm.margins.phase_margin_deg > 30.0  # design intent in the netlist's header
    assert result.coupling.dm_to_cm_db < -100.0 and result.coupling.cm_to_dm_db < -100.0  # matched halves
    reference = _pz_poles(tmp_path)  # reference: ngspice .pz of the closed circuit

    def nearest(p: complex) -> float:
        return float(np.min(np.abs(reference - p)) / abs(p))

    # every closed-loop pole of either mode (AAA fit of 1/(1+T), below the sweep top) is an ngspice pole
    assert len(dm.poles.poles_rad_s) >= 2 and len(cm.poles.poles_rad_s) >= 3
    assert all(nearest(p) < 1e-3 for p in dm.poles.poles_rad_s)
    assert all(nearest(p) < 1e-2 for p in cm.poles.poles_rad_s)
    assert any(p.imag > 0 for p in cm.poles.poles_rad_s)  # the CM loop's dominant complex pair is among them


def test_check_at_pair_json_has_a_document_per_mode(tmp_path, capsys):
    """`netloop check --at-pair P,N --json` prints one document per mode in the single-ended shape, plus the coupling, exit 0."""
    path = tmp_path / "fd.cir"
    path.write_text(norton_netlist())
    assert main(["check", str(path), "--at-pair", "outp,outn", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert set(doc["modes"]) == {"differential", "common"}
    for mode in doc["modes"].values():
        assert mode["schema"] == "netloop.loop/1" and mode["passed"] is True
    assert doc["passed"] is True
    assert doc["coupling"]["coupled"] is False and doc["coupling"]["threshold_db"] == -40.0
    assert set(doc["coupling"]) == {"dm_to_cm_db", "cm_to_dm_db", "dm_band_hz", "cm_band_hz", "threshold_db", "coupled", "unjudged"}
    # each figure's band is its own mode's highest gain crossover (netloop.jobs.measure_pair)
    for band, mode in (("dm_band_hz", "differential"), ("cm_band_hz", "common")):
        assert doc["coupling"][band] == max(c["freq_hz"] for c in doc["modes"][mode]["crossovers"]["gain"])


def test_check_at_pair_text_labels_both_modes_and_fails_a_requirement(tmp_path, capsys):
    """The text output labels both modes and the coupling, and a requirement one mode misses gives exit 1."""
    path = tmp_path / "fd.cir"
    path.write_text(norton_netlist())
    margins = []
    for k in (0, 1):
        fc = brentq(lambda f: abs(closed_forms(np.array([f]))[k][0]) - 1.0, 1e3, 1e9, rtol=1e-12)
        margins.append(180.0 + np.degrees(np.angle(closed_forms(np.array([fc]))[k][0])))
    assert margins[0] > 60.0 > margins[1]  # closed forms: the DM loop meets pm>=60, the CM loop misses it
    code = main(["check", str(path), "--at-pair", "outp,outn", "--require", "pm>=60"])
    out = capsys.readouterr().out
    assert code == 1
    assert "differential mode\nPASS" in out and "common mode\nFAIL" in out
    assert "coupling  negligible" in out


def test_middlebrook_and_tian_agree_mode_by_mode(simulator, tmp_path):
    """On a mismatched pair, Middlebrook's form of each mode equals Tian's from the same runs (algebraic identity, DEVELOPERS.md)."""
    path = tmp_path / "fd_mismatch.cir"
    path.write_text(norton_netlist(ron=1.2 * RO))
    sweep = Sweep(fmin_hz=1e2, fmax_hz=1e10, fmin_given=True, fmax_given=True, refine=False)
    by = {m: measure_pair(path, "outp,outn", method=m, sweep=sweep, simulator=simulator) for m in ("tian", "middlebrook")}
    for mode in ("differential", "common"):
        t1, t2 = by["tian"].modes[mode].analysis.t, by["middlebrook"].modes[mode].analysis.t
        keep = np.abs(t1) > 1e-5
        np.testing.assert_allclose(t2[keep], t1[keep], rtol=1e-9)


def test_check_at_pair_writes_one_csv_per_mode(tmp_path, capsys):
    """--csv with --at-pair writes FILE-differential.csv and FILE-common.csv, each with the mode's sampled T."""
    path = tmp_path / "fd.cir"
    path.write_text(norton_netlist())
    assert main(["check", str(path), "--at-pair", "outp,outn", "--csv", str(tmp_path / "t.csv")]) == 0
    capsys.readouterr()
    dm, cm = (tmp_path / "t-differential.csv").read_text(), (tmp_path / "t-common.csv").read_text()
    assert dm != cm and len(dm.splitlines()) > 100 and len(cm.splitlines()) > 100


def test_check_at_pair_rejects_a_malformed_pair(tmp_path, capsys):
    """A pair that is not two node names is one clear message and exit 2, before any simulation."""
    path = tmp_path / "fd.cir"
    path.write_text(norton_netlist())
    assert main(["check", str(path), "--at-pair", "outp"]) == 2
    assert "P,N" in capsys.readouterr().err


TIE = """two uncoupled matched halves, each with a bridge Cx as close to its driver stage as to the stage its node drives
ga1 0 np gp 0 1m
ra1 np 0 10k
ca1 np 0 1p
gb1 ob 0 np 0 1m
rb1 ob 0 10k
cb1 ob 0 2p
cx1 np xp 0.1p
r11 xp gp 1k
r21 xp ob 1k
rf1 ob gp 10k
rg1 gp 0 10k
ga2 0 nn gn 0 1m
ra2 nn 0 10k
ca2 nn 0 1p
gb2 obn 0 nn 0 1m
rb2 obn 0 10k
cb2 obn 0 2p
cx2 nn xn 0.1p
r12 xn gn 1k
r22 xn obn 1k
rf2 obn gn 10k
rg2 gn 0 10k
.end
"""


def test_an_unsure_bridge_at_a_pair_gets_the_second_break_a_single_node_gets(simulator, tmp_path):
    """A bridge the rules cannot place at either node (as close to both stages) is confirmed at the pair as at one node:
    the pair with both bridges on the other side finds the same closed-loop poles in both modes (check second-break)."""
    # References: two exact breaks of one circuit share its closed-loop poles (Bode's return ratio; Tian et al. 2001);
    # the halves share no element, so each mode's T is the half circuit's (Hurst and Lewis 1995): the single-node
    # break at np, which gets its own second break.
    from netloop.jobs.measure import measure

    path = tmp_path / "tie.cir"
    path.write_text(TIE)
    pair = measure_pair(path, "np,nn", simulator=simulator)
    alone = measure(path, "np", simulator=simulator)
    assert [c.passed for c in alone.checks if c.name == "second-break"] == [True]
    for mode in (pair.differential, pair.common):
        second = [c for c in mode.checks if c.name == "second-break"]
        assert len(second) == 1 and second[0].passed, second
        assert "np: cx1 to the driver side; nn: cx2 to the driver side" in second[0].detail
        common, i, j = np.intersect1d(mode.analysis.freq_hz, alone.analysis.freq_hz, return_indices=True)
        assert common.size >= 50 and np.allclose(mode.analysis.t[i], alone.analysis.t[j], rtol=1e-6)
    assert "cx1 on the load side (as close to the driver stage ga1 as to the stage gb1" in pair.differential.breaks.decided_by


def _norton_with(old: str, new: str) -> str:
    """norton_netlist with every ``old`` (which must be there: a value on a card, or on both halves' cards) made ``new``."""
    text = norton_netlist()
    assert old in text
    return text.replace(old, new)


def test_a_common_mode_loop_that_does_not_regulate_says_where_to_measure_it(simulator):
    """With the CM transconductance cut 100-fold the CM loop never reaches 0 dB at the pair while the DM loop does: the CM
    mode warns, word for word with both nodes of the pair and its peak |T|, and the DM mode does not."""
    # Reference: closed_forms' CM half circuit, T_cm(0) = 2 GMC GS RSC RO (circuit theory): 0.2 (-13.98 dB) with GMC = 2 uS,
    # falling above DC (two real poles); the DM loop keeps T_dm(0) = GMD GF RF (RO || RDL/2) = 50. Same warning on the
    # amplifier bench: tests/circuits/test_pair_benches.py::test_a_mode_that_does_not_pass_the_pair_says_where_to_measure_it.
    gmc = GMC / 100
    t_cm0 = 2 * gmc * GS * RSC * RO
    text = _norton_with(f"cm ref {GMC}", f"cm ref {gmc!r}")
    result = measure_pair(text, "outp,outn", simulator=simulator)
    assert result.differential.analysis.regulates and not result.common.analysis.regulates
    warning = (f"the common-mode loop hardly passes outp,outn (|T| at most {20 * np.log10(t_cm0):.4g} dB there, while the "
               "differential-mode loop regulates): measure it where it closes (netloop loops NETLIST lists the candidates), "
               "or at a pair both loops pass")
    assert warning in result.common.warnings
    assert not any("hardly passes" in w for w in result.differential.warnings)
    assert result.verdict == "pass"  # "does not regulate" is a PASS when every check passes (team verdict model)


def test_a_pair_with_no_common_mode_loop_is_inconclusive_with_what_to_try(simulator, tmp_path, capsys):
    """Without CM feedback (GMC = 0) the CM mode measures no loop under either placement of the bridge rdl: the job check
    "split" fails with what was tried and what to do, the coupling judges nothing and says why, and check exits 3."""
    # Reference: closed_forms' CM half circuit, T_cm = 2 GMC GS ZS Zc = 0 for GMC = 0 (circuit theory), under any split;
    # verdict model (team brief): a failed self-check makes the verdict inconclusive with the reason and what to try, exit 3.
    path = tmp_path / "no_cmfb.cir"
    path.write_text(_norton_with(f"cm ref {GMC}", "cm ref 0"))
    result = measure_pair(path, "outp,outn", simulator=simulator)
    assert result.verdict == "inconclusive"
    for mode in result.modes.values():
        split = next(c for c in mode.checks if c.name == "split")
        assert not split.passed
        assert split.detail.startswith("no placement of the bridging elements passes the self-checks: as placed, common mode: ")
        assert "; tried outp: rdl to the driver side; outn: rdl to the driver side: common mode: " in split.detail
        assert split.advice == "name each node's driver side with --driver NODE=ELEMENT[.PIN],..., or break the pair at other nodes"
    assert result.coupling.unjudged == ("the common mode measured no loop (|T| negligible everywhere), "
                                        "so the signal returned there is no reference for a coupling")
    assert not result.coupling.coupled
    assert main(["check", str(path), "--at-pair", "outp,outn"]) == 3
    assert "name each node's driver side with --driver NODE=ELEMENT[.PIN],..., or break the pair at other nodes" in capsys.readouterr().out


class _SecondBreakChanged:
    """The module's simulator, keeping the jobs of splits other than the first; with ``cl_scale`` != 1 it scales the
    output capacitors CL of those netlists, as a second break that found another circuit would."""

    def __init__(self, inner, cl_scale: float = 1.0):
        self.inner, self.cl_scale, self.first, self.others = inner, cl_scale, None, []

    def run(self, job):
        from dataclasses import replace

        self.first = self.first or job.netlist
        if job.netlist != self.first:
            self.others.append(job)
            changed = re.sub(r"(?m)^(cl[pn] \S+ 0 )\S+$", lambda m: m.group(1) + repr(self.cl_scale * CL), job.netlist)
            assert self.cl_scale == 1.0 or changed != job.netlist
            job = replace(job, netlist=changed)
        return self.inner.run(job)

    def __getattr__(self, name: str):
        return getattr(self.inner, name)


def test_the_second_break_of_a_pair_is_one_coarse_job(simulator):
    """rdl, which the rules cannot place at either output, is confirmed by a second break on one coarse job (no refinement
    rounds): both breaks find the same closed-loop poles in both modes and the measurement passes."""
    # References: two exact breaks of one circuit share its closed-loop poles (Bode's return ratio; Tian et al. 2001);
    # netloop.jobs.measure_checks (a second break is measured on a coarse sweep, one job).
    recording = _SecondBreakChanged(simulator)
    result = measure_pair(norton_netlist(), "outp,outn", simulator=recording)
    (second,), = {tuple(c for c in m.checks if c.name == "second-break") for m in result.modes.values()}
    assert second.passed and second.detail.startswith("a second break, outp: rdl to the driver side; outn: rdl to the driver side: ")
    assert len(recording.others) == 1 and all(len(run.sweeps) == 1 for run in recording.others[0].runs)
    assert result.verdict == "pass"


def test_a_second_break_that_finds_other_poles_makes_the_pair_inconclusive(simulator):
    """When the second break of the pair finds other closed-loop poles (here: its netlist given 3x the output
    capacitance), the check "second-break" fails with what to try and neither mode passes."""
    # Reference: two exact breaks of one circuit share its closed-loop poles (Bode's return ratio; Tian et al. 2001); 3x CL
    # moves the dominant closed-loop poles of both half circuits (closed_forms' Zd, Zc) far beyond the 2 % tolerance;
    # verdict model (team brief): a failed self-check is inconclusive, never PASS.
    result = measure_pair(norton_netlist(), "outp,outn", simulator=_SecondBreakChanged(simulator, cl_scale=3.0))
    for mode in result.modes.values():
        (second,) = [c for c in mode.checks if c.name == "second-break"]
        assert second.passed is False  # the documents write it as false, never null
        assert second.detail.endswith("; two exact breaks of one circuit must find the same closed-loop poles")
        assert second.advice == "sample more densely (raise --ppd), or break the pair at other nodes and compare"
        assert mode.verdict == "inconclusive"
    assert result.verdict == "inconclusive"


def test_a_driver_naming_only_inputs_at_a_pair_is_refused_with_the_outputs_there(simulator):
    """drivers= naming the sense transconductors' control inputs at each output gives a backwards split whose T fails its
    checks in both modes, so the pair is refused, naming the outputs on the first node."""
    # Reference: the Norton loop (circuit theory): gdp/gcp drive outp, gfp/gsp only sense it, so with gfp on the driver
    # side the loop is not broken where it is driven; netloop.jobs.measure.refuse_inputs_only for one node says the same.
    from netloop.errors import ProbeError

    with pytest.raises(ProbeError) as err:
        measure_pair(norton_netlist(), "outp,outn", drivers=("gfp", "gfn"), simulator=simulator)
    message = str(err.value)
    assert message.startswith("driver='gfp' names only inputs on node outp (gates, bases or control inputs), and the T it gives fails its checks (")
    assert message.endswith("); the outputs on the node are: gdp.p, gcp.p; name one of them as the driver")
    why = message.split("fails its checks (", 1)[1]
    assert why.startswith("differential mode: ") and "; common mode: " in why  # what each mode's T failed, both named


def test_a_pair_whose_differential_loop_is_unstable_when_opened_is_checked_by_ngspice_pole_zero(simulator):
    """A negative bridge rdl = -100k leaves the opened DM loop with one right-half-plane pole under either placement: the rules'
    placement is kept and said so (decided_by unchanged), and the DM mode alone carries the check closed-loop-pz, passed."""
    # Reference: the DM half circuit sees RDL/2 = -50k beside RO = 100k, a net -100k with CL: one pole at +1/(100k CL) in the
    # opened loop; the CM half carries no current in rdl (Hurst and Lewis 1995), so its opened loop has none. Z = 0 is
    # ngspice's own .pz of the closed circuit (netloop.jobs.measure_checks.pz_check).
    text = _norton_with(f"rdl outp outn {RDL}", "rdl outp outn -100k")
    result = measure_pair(text, "outp,outn", simulator=simulator)
    dm, cm = result.differential, result.common
    assert dm.analysis.nyquist.open_loop_rhp_poles == 1 and cm.analysis.nyquist.open_loop_rhp_poles == 0
    (pz,) = [c for c in dm.checks if c.name == "closed-loop-pz"]
    assert pz.passed and pz.detail == "ngspice's pole analysis of the closed circuit finds 0 right-half-plane pole(s); Z = N + P = 0"
    assert not any(c.name == "closed-loop-pz" for c in cm.checks)
    (split,) = [c for c in dm.checks if c.name == "split"]
    assert split.passed and split.detail.startswith("kept the rules placement: as placed, differential mode: T has 1 right-half-plane pole(s)")
    assert "netloop" not in dm.breaks.decided_by  # nothing moved, so decided_by says only what the rules decided
    assert result.stable and result.verdict == "pass"


# Two uncoupled matched halves (invented): g1 drives x from a, the inverting stage g2 (gm2) drives y from x, Miller
# capacitor cc from x to y around g2, and one more path between y and a ({back}). The rules keep cc with g2 (a local loop
# around the stage x drives).
MILLER_HALF = """g1{k} 0 x{k} a{k} 0 1m
r1{k} x{k} 0 10k
c1{k} x{k} 0 1p
g2{k} y{k} 0 x{k} 0 {gm2!r}
r2{k} y{k} 0 10k
c2{k} y{k} 0 5p
cc{k} x{k} y{k} 1p
{back}
ra{k} a{k} 0 1k
"""


def miller_pair(gm2: float, back: str) -> str:
    """The netlist of two MILLER_HALFs, p and n; ``back`` is the extra card between y{k} and a{k}."""
    halves = (MILLER_HALF.format(k=k, gm2=gm2, back=back.format(k=k)) for k in "pn")
    return "two Miller stages (invented)\n" + "".join(halves) + ".end\n"


def miller_loop(freq_hz, gm2: float) -> np.ndarray:
    """T of MILLER_HALF broken at x with cc on the driver side, a at 0 V (circuit theory): the driver side's open-circuit
    voltage -gm2 Z2 v_x and impedance 1/(s cc) + Z2 into the load side's ZL, T = gm2 Z2 ZL / (ZL + 1/(s cc) + Z2),
    Z2 = R2 || C2, ZL = R1 || C1."""
    s = 2j * np.pi * np.asarray(freq_hz, dtype=float)
    z2, zl = 10e3 / (1 + s * 10e3 * 5e-12), 10e3 / (1 + s * 10e3 * 1e-12)
    return gm2 * z2 * zl / (zl + 1 / (s * 1e-12) + z2)


def test_a_pair_whose_rules_split_measures_no_loop_moves_the_bridges_and_says_so(simulator):
    """At x the rules' split measures only the 1 GOhm loop (-80 dB, no loop): netloop moves both Miller capacitors to the
    driver side, measures the Miller loops, and the check "split" and decided_by say what it moved and why."""
    # References (circuit theory, the half circuit): with cc beside g2 the loop left is gm1 R1 gm2 R2 ra / (ra + rw) = 1e-4
    # (-80 dB); with cc on the driver side the break measures the Miller loop (miller_loop); the halves share no element,
    # so both modes' T are the half's (Hurst and Lewis 1995).
    result = measure_pair(miller_pair(1e-3, "rw{k} y{k} a{k} 1g"), "xp,xn", simulator=simulator)
    moved = ("moved xp: ccp to the driver side; xn: ccn to the driver side: with the rules' placement, differential mode: |T| is "
             "below -60 dB at every frequency (at most -80 dB): the break measured no loop; common mode: |T| is below -60 dB at "
             "every frequency (at most -80 dB): the break measured no loop; with this one both modes pass every self-check "
             "and T has no right-half-plane pole")
    for mode in result.modes.values():
        assert [(c.name, c.passed, c.detail) for c in mode.checks] == [("split", True, moved)]
        assert mode.breaks.decided_by.endswith(f"; netloop {moved}.") and mode.breaks.decided_by.count("netloop moved") == 1
        assert "ccp.p" in mode.breaks.driver_terminals and "ccn.p" in mode.breaks.driver_terminals
        assert (mode.breaks.side_a, mode.breaks.side_b) == ("xp_drive,xn_drive", "xp,xn")  # each half's driver side, then load side
        assert mode.sim.refinement_rounds >= 1  # the placement kept is measured as a first split is: its crossover refined
        t = miller_loop(mode.analysis.freq_hz, 1e-3)
        keep = np.abs(t) > 0.1  # where the 1 GOhm path (-80 dB) is below 1e-3 of the Miller loop
        assert keep.sum() > 20
        np.testing.assert_allclose(mode.analysis.t[keep], t[keep], rtol=1e-3)
    assert result.verdict == "pass"


def test_coupling_is_the_worst_below_each_modes_crossover(simulator):
    """On the 20 %-mismatched pair each coupling figure is the worst over the frequencies up to its mode's crossover only:
    it equals the worst of a sweep that ends at that crossover, though above it the CM runs return far more DM signal."""
    # Reference: the module docstring of netloop.jobs.measure_pair (the maximum up to the mode's highest gain crossover,
    # where its loop is strong and its margins are set); the sweep ending at the crossover holds those frequencies alone.
    # 0.3 dB: the two sweeps sample the rising coupling just below the crossover at slightly different points (our bound).
    text = norton_netlist(ron=1.2 * RO)
    full = measure_pair(text, "outp,outn", simulator=simulator).coupling
    for band, figure in ((full.cm_band_hz, "cm_to_dm_db"), (full.dm_band_hz, "dm_to_cm_db")):
        assert band < 1e8  # the mode crosses 0 dB well below the sweep's top
        upto = measure_pair(text, "outp,outn", simulator=simulator, sweep=Sweep(fmax_hz=band, fmax_given=True)).coupling
        assert getattr(full, figure) == pytest.approx(getattr(upto, figure), abs=0.3), figure


def test_a_pair_whose_split_opens_no_loop_is_inconclusive_and_says_why(simulator, tmp_path):
    """Two open-loop copies of the testbench's amplifier, broken at their first-stage outputs: the rules' split keeps each
    copy's only loop (its Miller branch) closed, so neither mode regulates and the check "opens-loop" fails, naming both
    nodes and what to do; the verdict is inconclusive, not a PASS for a loop that was never measured."""
    # References: circuits/benches/tb_open_copy.cir header (the copy's only loop is its Miller branch xol.o1 -> M6 -> out
    # -> Cc/Rz -> xol.o1); tests/jobs/test_splits.py (Rz on the load side at xol.o1 opens none of its 1 loop); verdict
    # model (team brief): a failed self-check is inconclusive, with the reason and what to try.
    shutil.copytree(CIRCUITS / "models", tmp_path / "models")
    (tmp_path / "benches").mkdir()
    bench = (CIRCUITS / "benches" / "tb_open_copy.cir").read_text()
    copy = "Xol olp oln olout vdd 0 ib2 ota cc=1.2p rz=1.5k\n"
    assert copy in bench
    path = tmp_path / "benches" / "two_open_copies.cir"
    path.write_text(bench.replace(copy, copy + "Xol2 olp oln olout2 vdd 0 ib3 ota cc=1.2p rz=1.5k\nIb3 vdd ib3 dc 20u\nCl3 olout2 0 2p\n"))
    result = measure_pair(path, "xol.o1,xol2.o1", simulator=simulator)
    for mode in result.modes.values():
        assert not mode.analysis.regulates
        (opens,) = [c for c in mode.checks if c.name == "opens-loop"]
        assert not opens.passed
        halves = opens.detail.split("; the split at ")
        assert len(halves) == 2 and halves[0].startswith("the split at xol.o1 opens none of the 1 loop(s) of loop ")
        assert halves[1].startswith("xol2.o1 opens none of the 1 loop(s) of loop ")
        assert all(h.endswith("(1 closed on the load side): T there measures no loop of the circuit, so its 'does not regulate' "
                              "would be no promise") for h in halves)
        assert opens.advice == ("name the driver side with --driver, or break the loop at another node (netloop loops NETLIST "
                                "lists what each break opens)")
        assert mode.verdict == "inconclusive"


def test_a_pair_whose_moved_split_does_not_regulate_is_judged_on_the_split_it_measured(simulator):
    """With only a forward path from a to y, the rules' split measures nothing and netloop moves both Miller capacitors to
    the driver side; the Miller loops it then measures peak below 0 dB, and the check "opens-loop" judges that moved split
    (it opens the Miller loop): a PASS that does not regulate, as the single-node measurement of one half gives."""
    # References (circuit theory): gz carries a to y only (a VCCS has no reverse transmission), so the Miller branch is the
    # only loop through x and the moved split opens it; its T is miller_loop with gm2 = 0.5 mS (peak about -4.1 dB); the
    # halves share no element, so each mode's T is the half's (Hurst and Lewis 1995), and netloop.jobs.measure.measure at
    # xp judges opens-loop on the split it reports. Before the fix the pair judged the rules' split: inconclusive.
    from netloop.jobs.measure import measure

    text = miller_pair(0.5e-3, "gz{k} 0 y{k} a{k} 0 1u")
    result = measure_pair(text, "xp,xn", simulator=simulator)
    alone = measure(text, "xp", simulator=simulator)
    assert [c.passed for c in alone.checks if c.name == "opens-loop"] == [True] and alone.verdict == "pass"
    for mode in result.modes.values():
        assert not mode.analysis.regulates
        (split,) = [c for c in mode.checks if c.name == "split"]
        assert split.passed and split.detail.startswith("moved xp: ccp to the driver side; xn: ccn to the driver side: ")
        (opens,) = [c for c in mode.checks if c.name == "opens-loop"]
        assert opens.passed and opens.detail.startswith("the split at xp opens 1 of the 1 loop(s) of loop ")
        t = miller_loop(mode.analysis.freq_hz, 0.5e-3)
        keep = np.abs(t) > 1e-3
        np.testing.assert_allclose(mode.analysis.t[keep], t[keep], rtol=1e-6)
        assert mode.verdict == "pass"
    assert result.verdict == "pass"


def test_a_pair_is_stable_only_when_both_modes_are_and_couples_only_beyond_the_threshold():
    """PairResult.stable needs the differential and the common loop stable; Coupling.coupled needs either figure beyond
    the threshold (exactly at it is not), and nothing when the coupling is unjudged (by construction)."""
    from types import SimpleNamespace

    from netloop.jobs.measure_pair import Coupling, PairResult

    def pair(dm, cm):
        return PairResult(SimpleNamespace(stable=dm), SimpleNamespace(stable=cm), None, ("outp", "outn"))

    assert [pair(*s).stable for s in ((True, True), (True, False), (False, True), (False, False))] == [True, False, False, False]
    limit = Coupling(-40.0, -60.0, 1e6, 1e5).threshold_db
    assert [Coupling(x, y, 1e6, 1e5).coupled for x, y in ((limit, -90.0), (-90.0, limit), (limit + 0.5, -90.0), (-90.0, limit + 0.5))] == [
        False, False, True, True]
    assert not Coupling(limit + 10, limit + 10, 1e6, 1e5, unjudged="the common mode measured no loop").coupled


def test_a_doubted_pair_whose_other_placements_cannot_be_built_says_so():
    """When the probe refuses every other placement of a doubted pair's bridges, the pair keeps the rules' placement and
    the check "split" says that no other placement could be built (failing when a self-check failed)."""
    from types import SimpleNamespace

    from netloop.analysis.results import Check
    from netloop.errors import ProbeError
    from netloop.jobs.measure_pair import _settled
    from netloop.probe.sides import Bridge

    def refuse(place, coarse):
        raise ProbeError("the node would be left without a load")

    failing = SimpleNamespace(checks=(Check("falls-at-top", False, "|T| rises at the top", "widen the sweep"),))
    first = SimpleNamespace(doubts="|T| rises at the top", analyses={"differential": failing, "common": failing},
                            probe=SimpleNamespace(nodes=("xp", "xn"), p=SimpleNamespace(bridges=(Bridge("rfp", "load", "the only load", False),)),
                                                  n=SimpleNamespace(bridges=(Bridge("rfn", "load", "the only load", False),))))
    kept, (check,) = _settled(first, refuse)
    assert kept is first and not check.passed
    assert check.detail == ("no placement of the bridging elements passes the self-checks: as placed, |T| rises at the top; "
                            "tried no other placement could be built")


@pytest.mark.parametrize(("doubts", "regulates", "taken"), [("", (True, True), True), ("T rises at the top", (True, True), False),
                                                            ("", (True, False), False)])
def test_the_pair_under_its_deeper_names_is_taken_only_when_no_doubt_remains_and_no_mode_stops_regulating(doubts, regulates, taken):
    """A pair doubted as named is measured again under the names its nets have inside the block that drives them, and that
    measurement is taken only when it raises no doubt and regulates in as many modes as the first."""
    from types import SimpleNamespace

    from netloop.jobs.measure_pair import _deeper

    def sampled(doubt: str, modes: tuple[bool, bool]):
        return SimpleNamespace(doubts=doubt, analyses={m: SimpleNamespace(regulates=r, largest_gain_db=-3.0) for m, r in zip(("differential", "common"), modes)},
                               probe=SimpleNamespace(nodes=("op", "on")))

    first = sampled("the common mode measured no loop", (True, True))
    structure = SimpleNamespace(of=lambda node: SimpleNamespace(alias=lambda n: f"xamp.{n}"))
    trial = sampled(doubts, regulates)
    got, checks = _deeper(first, structure, lambda place, coarse, nodes: trial)
    assert (got is trial) == taken and len(checks) == int(taken)
