"""Node-pair breaks on the fully differential benches: each side decided as a single node's, T equal to an expert's pair probe."""

from __future__ import annotations

import numpy as np
import pytest

from netloop.analysis import analyse
from netloop.jobs.measure_pair import measure_pair
from netloop.probe import break_loop
from pair_experts import BENCHES, pair_expert, same_t

pytestmark = pytest.mark.ngspice

FD_MILLER = BENCHES / "fd_miller_pair.cir"
FD_CAP = BENCHES / "fd_cap_amp.cir"
FD_MILLER_SKY130 = BENCHES / "fd_miller_pair_sky130.cir"  # the same amplifier on the real sky130 process

# (bench, pair) -> the expert pair decks that are right there (either, where an expert accepts either side for a bridge)


@pytest.fixture(scope="module")
def simulator():
    """One ngspice for the module's measurements."""
    from netloop.sim import default_simulator

    sim = default_simulator()
    yield sim
    sim.close()


PAIRS = {
    (FD_MILLER, "xamp.o1p,xamp.o1n"): ("fd_miller_pair.o1.rz-load", "fd_miller_pair.o1.rz-driver"),
    (FD_MILLER, "xamp.outp,xamp.outn"): ("fd_miller_pair.out",),
    (FD_MILLER, "outp,outn"): ("fd_miller_pair.out",),  # named above the amplifier that drives them: broken inside it
    (FD_MILLER, "xamp.inp,xamp.inn"): ("fd_miller_pair.in",),
    (FD_MILLER, "xp,xn"): ("fd_miller_pair.in",),
    (FD_MILLER_SKY130, "xamp.o1p,xamp.o1n"): ("fd_miller_pair_sky130.o1.rz-load", "fd_miller_pair_sky130.o1.rz-driver"),
    (FD_MILLER_SKY130, "xamp.inp,xamp.inn"): ("fd_miller_pair_sky130.in",),
    (FD_CAP, "xp,xn"): ("fd_cap_amp.pair-in",),
    (FD_CAP, "outp,outn"): ("fd_cap_amp.pair-out",),
}


def _matches_an_expert(pair, stems) -> str | None:
    """None when both modes' T equal one expert deck's (the same deck for both), else what differs."""
    for stem in stems:
        f, t_dm, t_cm = pair_expert(stem)
        if same_t(pair.differential, f, t_dm) and same_t(pair.common, f, t_cm):
            return None
    return f"neither mode's T equals an expert pair probe ({', '.join(stems)})"


@pytest.mark.parametrize(("bench", "nodes"), list(PAIRS), ids=[f"{b.stem}:{n}" for b, n in PAIRS])
def test_pair_break_equals_an_expert_pair_probe_or_is_inconclusive(bench, nodes, simulator):
    """netloop's pair break gives the DM and CM return ratios of an expert's hand-placed pair probe, or says inconclusive."""
    # Reference: the expert decks in circuits/benches/expert/, run in plain ngspice with the four modal runs of Hurst
    # and Lewis (1995) and Tian et al.'s (2001) formula written out in pair_experts.py.
    pair = measure_pair(bench, nodes, simulator=simulator)
    if pair.verdict == "inconclusive":
        return
    assert _matches_an_expert(pair, PAIRS[bench, nodes]) is None
    assert pair.stable  # both circuits are stable: the expert decks' closed-loop poles (test below) are all in the left half plane
    assert not pair.coupling.coupled  # matched halves: the modes do not couple (Hurst and Lewis 1995)


@pytest.mark.parametrize(("bench", "nodes"), [(FD_MILLER, "xamp.o1p,xamp.o1n"), (FD_MILLER, "xamp.outp,xamp.outn"),
                                              (FD_MILLER_SKY130, "xamp.o1p,xamp.o1n"),
                                              (FD_MILLER, "xamp.inp,xamp.inn"), (FD_CAP, "xp,xn"), (FD_CAP, "outp,outn")])
def test_each_side_of_a_pair_is_decided_as_the_single_node_break_decides_it(bench, nodes, simulator):
    """Each node of a pair is split exactly as break_loop splits it alone: the same terminals on the driver side."""
    # Reference: the single-node break of the same node (netloop.probe.break_loop), which the issue asks the pair to follow.
    pair = measure_pair(bench, nodes, simulator=simulator)
    from netloop.netlist import parse_file

    netlist = parse_file(bench)
    alone = [break_loop(netlist, node) for node in nodes.split(",")]
    expected = tuple(t for half in alone for t in half.driver_terminals)
    assert pair.differential.breaks.driver_terminals == expected
    assert pair.common.breaks.driver_terminals == expected
    for half in alone:  # and the pair says how each side was decided, in the single node's own words
        assert half.decided_by[:-1] in pair.differential.breaks.decided_by


def test_miller_branches_at_the_first_stage_outputs_stay_where_the_single_node_break_puts_them(simulator):
    """At the first-stage outputs each Miller branch (Rz in series with Cc) sits on the side the single-node break chose,
    and the DM margins are those of the expert probe with it there, not of the other placement."""
    # Reference: expert/fd_miller_pair.o1.rz-load.sp (Miller loop closed within the second stage it wraps) against
    # expert/fd_miller_pair.o1.rz-driver.sp (Miller loop opened too); the margins read by netloop.analysis from the expert's T.
    from netloop.netlist import parse_file

    alone = break_loop(parse_file(FD_MILLER), "xamp.o1p")
    side = "driver" if "xamp.rz1.p" in alone.driver_terminals else "load"
    pair = measure_pair(FD_MILLER, "xamp.o1p,xamp.o1n", simulator=simulator)
    assert ("xamp.rz1.p" in pair.differential.breaks.driver_terminals) == (side == "driver")
    assert ("xamp.rz2.p" in pair.differential.breaks.driver_terminals) == (side == "driver")
    f, t_dm, _ = pair_expert(f"fd_miller_pair.o1.rz-{side}")
    want = analyse(f, t_dm)
    got = pair.differential.analysis
    assert got.margins.phase_margin_deg == pytest.approx(want.margins.phase_margin_deg, abs=0.1)
    assert got.margins.unity_gain_hz == pytest.approx(want.margins.unity_gain_hz, rel=1e-3)
    assert got.margins.gain_margin_db == pytest.approx(want.margins.gain_margin_db, abs=0.1)


def test_pair_drivers_put_each_miller_branch_on_the_driver_side(simulator):
    """drivers= for each node of the pair overrides the rules node by node: with Rz named, T equals the expert's rz-driver probe."""
    # Reference: expert/fd_miller_pair.o1.rz-driver.sp, the expert's pair probe with each Miller branch on the driver side.
    pair = measure_pair(FD_MILLER, "xamp.o1p,xamp.o1n", simulator=simulator,
                        drivers=("xamp.m1.d,xamp.m3.d,xamp.rz1", "xamp.m2.d,xamp.m4.d,xamp.rz2"))
    assert "xamp.rz1.p" in pair.differential.breaks.driver_terminals
    f, t_dm, t_cm = pair_expert("fd_miller_pair.o1.rz-driver")
    assert same_t(pair.differential, f, t_dm) and same_t(pair.common, f, t_cm)
    assert pair.stable or pair.verdict == "inconclusive"  # never a false "unstable": the expert probes' closed-loop poles are stable


def _near(a: np.ndarray, b: np.ndarray) -> bool:
    """Every pole of ``a`` lies within 2 % (or 1 Hz) of one of ``b``'s."""
    return all(np.min(np.abs(b - p)) <= 2e-2 * abs(p) + 2 * np.pi for p in a)


def _closed_loop_poles(t: np.ndarray, f: np.ndarray, band_hz: float) -> np.ndarray:
    poles = np.asarray(analyse(f, t).poles.poles_rad_s)
    return poles[np.abs(poles) <= 2 * np.pi * band_hz]


@pytest.mark.parametrize("stems", [("fd_miller_pair.o1.rz-load", "fd_miller_pair.o1.rz-driver", "fd_miller_pair.out", "fd_miller_pair.in"),
                                   ("fd_miller_pair_sky130.o1.rz-load", "fd_miller_pair_sky130.o1.rz-driver", "fd_miller_pair_sky130.in"),
                                   ("fd_cap_amp.pair-in", "fd_cap_amp.pair-out")])
def test_expert_pair_probes_of_one_circuit_find_the_same_differential_closed_loop_poles(stems):
    """Expert pair probes at different node pairs of one circuit give the same DM closed-loop poles up to ten times the crossover."""
    # Reference: the zeros of 1 + T at any complete break are the closed-loop poles of the one circuit (Bode's return
    # ratio; Tian et al. 2001), in each mode of a matched pair (Hurst and Lewis 1995); the fit is netloop.analysis's
    # rational fit of 1/(1+T). The DM loop passes every one of these pairs.
    f, t_dm, _ = pair_expert(stems[0])
    band = 10 * analyse(f, t_dm).margins.unity_gain_hz
    first = _closed_loop_poles(t_dm, f, band)
    assert first.size and np.all(first.real <= 0)  # both circuits are stable
    for stem in stems[1:]:
        f, t_dm, _ = pair_expert(stem)
        other = _closed_loop_poles(t_dm, f, band)
        assert _near(first, other) and _near(other, first), stem


def test_expert_pair_probes_find_the_same_common_mode_closed_loop_pair():
    """The CM loop of the Miller bench gives the same least-damped closed-loop pair from its first-stage outputs and its outputs."""
    # Reference: as above (Bode's return ratio; Hurst and Lewis 1995). Only the dominant pair is compared: a CM pole that
    # cancels against a zero of T seen from one break need not appear in the other's fit.
    pairs = []
    for stem in ("fd_miller_pair.o1.rz-load", "fd_miller_pair.o1.rz-driver", "fd_miller_pair.out"):
        f, _, t_cm = pair_expert(stem)
        fit = analyse(f, t_cm).poles
        pairs.append((fit.dominant_freq_hz, fit.dominant_damping))
    for freq, damping in pairs[1:]:
        assert freq == pytest.approx(pairs[0][0], rel=2e-2) and damping == pytest.approx(pairs[0][1], abs=2e-2)


def test_capacitive_feedback_pair_at_the_inputs_is_never_a_bogus_no_regulation(simulator):
    """At the inputs of the capacitive-feedback amplifier the DM loop regulates and the modes do not couple; the CM loop
    that does not pass these nodes reads as what it is, far below 0 dB, like the expert's."""
    # Reference: expert/fd_cap_amp.pair-in.sp (four modal runs in plain ngspice, pair_experts.py).
    f, t_dm, t_cm = pair_expert("fd_cap_amp.pair-in")
    assert np.max(np.abs(t_dm)) > 10  # the DM loop at the inputs: about 39 dB at DC
    assert np.max(np.abs(t_cm)) < 1e-2  # the CMFB loop closes through cm and cmfb, not the inputs: below -40 dB
    pair = measure_pair(FD_CAP, "xp,xn", simulator=simulator)
    assert pair.differential.analysis.regulates
    assert not pair.coupling.coupled
    assert same_t(pair.differential, f, t_dm) and same_t(pair.common, f, t_cm)


def test_pair_drivers_naming_only_inputs_are_refused_with_the_outputs_named(simulator):
    """drivers= naming only the second stage's gates at the first-stage outputs is refused, as driver= is at one node,
    and the error names the outputs that sit there."""
    # Reference: common practice; the outputs on xamp.o1p are the drains of M1 and M3 (the bench's netlist). With the
    # gate on the driver side T never reaches 0 dB in either mode: a backwards split.
    from netloop.errors import ProbeError

    with pytest.raises(ProbeError, match=r"names only inputs on node xamp\.o1p .* the outputs on the node are: xamp\.m1\.d, xamp\.m3\.d"):
        measure_pair(FD_MILLER, "xamp.o1p,xamp.o1n", simulator=simulator, drivers=("xamp.m6.g", "xamp.m7.g"))


def test_check_at_pair_takes_one_driver_per_node_and_says_so(capsys):
    """check --at-pair with --driver NODE=... for each node measures the expert's split and says the drivers were given."""
    # Reference: expert/fd_miller_pair.o1.rz-driver.sp (its DM crossover and Nyquist verdict, read by netloop.analysis
    # from the expert's T; P = 2 there: opening each Miller loop leaves T with poles of its own, and Z = N + P = 0).
    import json

    from netloop.cli.main import main

    status = main(["check", str(FD_MILLER), "--at-pair", "xamp.o1p,xamp.o1n", "--json",
                   "--driver", "xamp.o1p=xamp.m1.d,xamp.m3.d,xamp.rz1", "--driver", "xamp.o1n=xamp.m2.d,xamp.m4.d,xamp.rz2"])
    dm = json.loads(capsys.readouterr().out)["modes"]["differential"]
    # in the command line's words (netloop.cli.words): --driver, not the library's driver=
    assert "xamp.o1p: driver side given by --driver xamp.m1.d,xamp.m3.d,xamp.rz1" in dm["break"]["decided_by"]
    assert "xamp.o1n: driver side given by --driver xamp.m2.d,xamp.m4.d,xamp.rz2" in dm["break"]["decided_by"]
    f, t_dm, _ = pair_expert("fd_miller_pair.o1.rz-driver")
    want = analyse(f, t_dm)
    assert dm["margins"]["unity_gain_hz"] == pytest.approx(want.margins.unity_gain_hz, rel=1e-3)
    assert want.stable and status == 0


def test_a_mode_that_does_not_pass_the_pair_says_where_to_measure_it(simulator):
    """At the capacitive-feedback amplifier's inputs the CM mode, which closes through CMFB, does not regulate and says to
    measure it where it closes; the DM mode there carries no such warning."""
    # Reference: expert/fd_cap_amp.pair-in.sp: |T_cm| below -40 dB at the inputs, |T_dm| about 39 dB at DC.
    pair = measure_pair(FD_CAP, "xp,xn", simulator=simulator)
    assert any("common-mode loop hardly passes xp,xn" in w for w in pair.common.warnings)
    assert not any("hardly passes" in w for w in pair.differential.warnings)
    # and its "does not regulate" is a promise: the split opens loops through the pair (the DM loops the expert measures)
    assert [c.passed for c in pair.common.checks if c.name == "opens-loop"] == [True]


def test_a_pair_named_above_the_block_that_drives_it_is_broken_inside_the_block(simulator):
    """outp,outn named at the testbench level, where the amplifier's own CMFB sense resistors would stay on the driver side
    and the CM mode would not regulate, is broken as xamp.outp,xamp.outn and says so."""
    # Reference: expert/fd_miller_pair.out.sp (probes inside the amplifier, Rcm1/Rcm2 on the load side): its CM T
    # regulates (about 68 dB at DC), and the pair's T equals it (test above).
    pair = measure_pair(FD_MILLER, "outp,outn", simulator=simulator)
    assert pair.common.analysis.regulates and pair.differential.analysis.regulates
    assert pair.common.breaks.node.startswith("xamp.outp,xamp.outn")
    assert "broke the pair under the names the nets have inside the block that drives them (xamp.outp,xamp.outn)" in pair.common.breaks.decided_by


def test_pair_splits_are_the_same_under_five_hash_seeds():
    """break_pair's decision at each pair of both benches is identical under five PYTHONHASHSEED values."""
    # Reference: issue 14 d (every automatic choice independent of the hash seed); five processes compared.
    import os
    import subprocess
    import sys

    code = ("import sys; from netloop.netlist import parse_file; from netloop.probe.differential import break_pair\n"
            "for bench, pair in [(sys.argv[1], 'xamp.o1p,xamp.o1n'), (sys.argv[1], 'xamp.inp,xamp.inn'), (sys.argv[2], 'xp,xn'), (sys.argv[2], 'outp,outn')]:\n"
            "    p = break_pair(parse_file(bench), *pair.split(','))\n"
            "    print(p.p.driver_terminals, p.n.driver_terminals, p.p.decided_by, p.n.decided_by)\n")
    outs = set()
    for seed in ("0", "1", "7", "42", "1234"):
        env = {**os.environ, "PYTHONHASHSEED": seed}
        run = subprocess.run([sys.executable, "-c", code, str(FD_MILLER), str(FD_CAP)], capture_output=True, text=True, env=env, check=True)
        outs.add(run.stdout)
    assert len(outs) == 1


def test_a_pair_split_that_measures_no_loop_is_inconclusive_without_a_bogus_coupling(simulator):
    """Naming only the off reset switches as the drivers at the inputs measures no loop: both modes are inconclusive, and
    no mode coupling (mismatched halves) is claimed from a ratio to a signal that is not there."""
    # Reference: the bench's halves are identical by construction, so the modes cannot couple (Hurst and Lewis 1995);
    # with the feedback capacitors on the load side the loop closes around the probe (expert/fd_cap_amp.pair-in.sp puts
    # them on the driver side and measures about 39 dB), and |T| here stays far below -60 dB.
    pair = measure_pair(FD_CAP, "xp,xn", simulator=simulator, drivers=("mr1.d", "mr2.d"))
    assert pair.verdict == "inconclusive"
    assert not pair.coupling.coupled and "measured no loop" in pair.coupling.unjudged
    assert not any("halves are mismatched" in w for w in (*pair.differential.warnings, *pair.common.warnings))


def test_differential_closed_loop_poles_are_ngspice_pz_poles(tmp_path):
    """The DM closed-loop poles fitted from the expert pair probe at the first-stage outputs are poles ngspice's .pz finds
    for the closed amplifier, differential input to differential output."""
    # Reference: ngspice's own pole-zero analysis of the closed circuit (pz inp inn outp outn vol pol; ngspice 39 lists
    # three poles before its iteration limit, the two below 100 MHz being the DM loop's); the fit is netloop.analysis's.
    import re
    import subprocess

    text = FD_MILLER.read_text()
    text = re.sub(r"(?m)^\.end\s*$", "", text).replace(".lib ../models", f".lib {(BENCHES.parent / 'models').as_posix()}")
    deck = tmp_path / "pz.cir"
    deck.write_text(text + ".control\npz inp inn outp outn vol pol\nprint all\nquit\n.endc\n.end\n")
    run = subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True, timeout=120, cwd=tmp_path)
    found = re.findall(r"pole\(\d+\)\s*=\s*([-+0-9.eE]+),\s*([-+0-9.eE]+)", run.stdout)
    assert found, run.stdout[-2000:]
    pz = np.array([complex(float(r), float(i)) for r, i in found])  # rad/s
    f, t_dm, _ = pair_expert("fd_miller_pair.o1.rz-load")
    fitted = _closed_loop_poles(t_dm, f, 5 * analyse(f, t_dm).margins.unity_gain_hz)
    assert fitted.size >= 2 and _near(fitted, pz)


@pytest.mark.parametrize("bench", ["fd_miller_pair", "fd_miller_pair_sky130"])
def test_check_without_at_measures_the_mirror_pair_with_the_expert_pair_probes_closed_loop_poles(bench, simulator):
    """check without --at on the FD Miller benches finds outp and outn mirror images and measures the group as that pair:
    a differential- and a common-mode result, both passing, each with the closed-loop poles (up to five times its crossover)
    of the same mode of the expert pair probe at the first-stage outputs; a break at one net would mix the modes."""
    # Reference: the zeros of 1 + T at any break of a mode are poles of that mode's half circuit (Bode's return ratio;
    # Tian et al. 2001; Hurst and Lewis 1995), read here from the expert pair probe at the first-stage outputs (rational fit
    # of each mode's 1/(1+T) by netloop.analysis). The T of fd_miller_pair's pair itself: test_pair_break_equals_an_expert_...
    from netloop.jobs.discover import check_loops

    check = check_loops(BENCHES / f"{bench}.cir", simulator=simulator)
    assert check.verdict == "pass" and len(check.groups) == 2
    f, t_dm, t_cm = pair_expert(f"{bench}.o1.rz-load")
    for g, t in zip(check.groups, (t_dm, t_cm), strict=True):
        mode = "differential" if t is t_dm else "common"
        # named above the amplifier that drives them, the pair is broken inside it (measure_pair, docs/splitting.md)
        assert g.result.breaks.node == f"xamp.outp,xamp.outn ({mode} mode)" and g.result.label == f"loop 1 (outp,outn {mode} mode)"
        band = 5 * g.result.analysis.margins.unity_gain_hz
        found = _closed_loop_poles(g.result.analysis.t, g.result.analysis.freq_hz, band)
        assert found.size >= 1 and _near(found, np.asarray(analyse(f, t).poles.poles_rad_s))
