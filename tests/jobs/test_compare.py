"""compare(): several break locations in one deck, against closed forms, ngspice's .pz and separate measure() calls."""

from __future__ import annotations

import math
import re
import subprocess
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from netloop.analysis.return_ratio import middlebrook, tian
from netloop.jobs.compare import POLE_RTOL, compare, dominant_pole
from netloop.jobs.compare_explain import method_difference
from netloop.errors import ProbeError, SimulationError
from netloop.jobs.measure import Sweep, measure
from netloop.sim import AnalyticSimulator, default_simulator

ROOT = Path(__file__).resolve().parents[2]
MILLER = ROOT / "circuits" / "miller_buffer.cir"

A0, F1, F2 = 1000.0, 1e3, 1e6
C1 = 1.0 / (2 * math.pi * 1e3 * F1)  # 1 kOhm with C gives the pole F
C2 = 1.0 / (2 * math.pi * 1e3 * F2)
FIXED = Sweep(fmin_hz=1.0, fmax_hz=1e9, fmin_given=True, fmax_given=True)


def _loop(suffix: str, gain: float) -> str:
    """An error amplifier e0 = gain (ref - out), RC pole F1, unity buffer eb, RC pole F2 back to out: one loop."""
    s = suffix
    return "\n".join([
        f"vref{s} ref{s} 0 dc 0.5",
        f"e0{s} n0{s} 0 ref{s} out{s} {gain}",
        f"r1{s} n0{s} p1{s} 1k",
        f"c1{s} p1{s} 0 {C1:.17g}",
        f"eb{s} b1{s} 0 p1{s} 0 1",
        f"r2{s} b1{s} out{s} 1k",
        f"c2{s} out{s} 0 {C2:.17g}",
    ])


def _closed_form(freq_hz, gain: float) -> np.ndarray:
    s = 2j * math.pi * np.asarray(freq_hz, dtype=float)
    return gain / ((1 + s / (2 * math.pi * F1)) * (1 + s / (2 * math.pi * F2)))


def _closed_loop_poles(gain: float) -> np.ndarray:
    # zeros of 1 + T: (1 + s/w1)(1 + s/w2) + gain = 0 (circuit theory), solved with numpy.roots
    w1, w2 = 2 * math.pi * F1, 2 * math.pi * F2
    return np.roots([1 / (w1 * w2), 1 / w1 + 1 / w2, 1 + gain])


@pytest.fixture
def single(tmp_path) -> Path:
    path = tmp_path / "single.cir"
    path.write_text("behavioural single loop\n" + _loop("", A0) + "\n.end\n")
    return path


@pytest.mark.ngspice
def test_single_loop_every_break_gives_the_closed_form(single):
    """Four breaks on one behavioural loop give the closed-form T to 1e-6, agree with each other, and find its closed-loop poles."""
    c = compare(single, ["out", "n0", "p1", "b1"], sweep=FIXED)
    for r in c.results:
        t = r.analysis.t
        ref = _closed_form(r.analysis.freq_hz, A0)
        assert np.max(np.abs(t - ref) / np.abs(ref)) < 1e-6  # reference: closed form T(s) of the loop
    assert len(c.differences) == 6
    assert all(d.kind == "same" and d.max_relative_difference < 1e-6 for d in c.differences)
    assert not c.defects
    assert c.poles_agree is True
    expected = max(_closed_loop_poles(A0), key=lambda p: (p.real, p.imag))  # reference: numpy.roots of 1 + T
    for r in c.results:
        assert dominant_pole(r) == pytest.approx(expected, rel=1e-4)


@pytest.mark.ngspice
def test_two_independent_loops_are_named_as_different_groups(tmp_path):
    """Locations on two separate loops are reported as different loop groups, each naming its own loop, and each T is its closed form."""
    path = tmp_path / "two.cir"
    path.write_text("two behavioural loops\n" + _loop("a", A0) + "\n" + _loop("b", 100.0) + "\n.end\n")
    c = compare(path, ["outa", "p1b"], sweep=FIXED)
    for r, gain in zip(c.results, (A0, 100.0)):
        ref = _closed_form(r.analysis.freq_hz, gain)
        assert np.max(np.abs(r.analysis.t - ref) / np.abs(ref)) < 1e-6  # reference: closed form T(s) of each loop
    (d,) = c.differences
    assert d.kind == "different loop groups"
    assert "loop 1 (" in d.explanation and "loop 2 (" in d.explanation
    assert any("e0a" in lp for lp in d.loops) and any("e0b" in lp for lp in d.loops)
    assert c.pole_checks == () and c.poles_agree is None


class _Recording:
    """A simulator that hands every job to ``sim`` and keeps it in ``jobs``."""

    backend = "recording"

    def __init__(self, sim, jobs: list):
        self.sim, self.jobs = sim, jobs

    def run(self, job):
        self.jobs.append(job)
        return self.sim.run(job)

    def operating_point(self, netlist):
        return self.sim.operating_point(netlist)


@pytest.mark.ngspice
def test_one_deck_equals_separate_measurements():
    """T from the shared deck equals measure() at each location alone to 1e-9, from one job holding two runs per location."""
    sweep = Sweep(fmin_hz=10.0, fmax_hz=1e10, fmin_given=True, fmax_given=True, refine=False)
    sim = default_simulator()
    jobs = []
    try:
        c = compare(MILLER, ["out", "o1", "d1"], sweep=sweep, simulator=_Recording(sim, jobs))
        alone = {at: measure(MILLER, at, sweep=sweep, simulator=sim) for at in ("out", "o1", "d1")}
    finally:
        sim.close()
    assert len(jobs) == 1 and len(jobs[0].runs) == 6
    for at, ref in alone.items():
        t = c.result(at).analysis.t
        assert np.array_equal(c.result(at).analysis.freq_hz, ref.analysis.freq_hz)
        assert np.max(np.abs(t - ref.analysis.t) / np.abs(ref.analysis.t)) < 1e-9  # reference: measure() at that location alone


@pytest.mark.ngspice
def test_refinement_rounds_are_batched_for_all_locations():
    """With widening and refinement on, every job the comparison runs holds the two runs of every location."""
    sim = default_simulator()
    jobs = []
    try:
        c = compare(MILLER, ["out", "o1"], simulator=_Recording(sim, jobs))
    finally:
        sim.close()
    assert c.sim.refinement_rounds >= 1
    assert all(sorted(r.name for r in job.runs) == ["0.series", "0.shunt", "1.series", "1.shunt"] for job in jobs)


def _pz_poles(netlist: Path, transfer: str, tmp_path: Path) -> np.ndarray:
    """Closed-loop poles from ngspice's own .pz (``pz <transfer> vol pol``) on a copy of ``netlist``."""
    text = netlist.read_text().replace(".lib models/corners.lib", f".lib {netlist.parent / 'models' / 'corners.lib'}")
    text = re.sub(r"^\.end\s*$", f".control\npz {transfer} vol pol\nprint all\nquit\n.endc\n.end", text, flags=re.MULTILINE)
    deck = tmp_path / f"pz_{netlist.name}"
    deck.write_text(text)
    run = subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True, timeout=120, cwd=tmp_path)
    found = re.findall(r"^pole\(\d+\) = (\S+),(\S+)$", run.stdout, re.MULTILINE)
    assert found, run.stdout[-1500:]
    return np.array([complex(float(a), float(b)) for a, b in found])


@pytest.mark.ngspice
def test_miller_locations_differ_by_named_loops_and_share_the_poles(tmp_path):
    """On the Miller buffer, o1 broken with Rz on its driver side opens the Cc/Rz local loop that out leaves closed, out opens the global loops that pass d1 inside the first stage; the differences name them, and every location finds ngspice's .pz dominant pole."""
    c = compare(MILLER, ["out", "o1", "d1"], drivers={"o1": "m2.d,m4.d,rz.p"})
    by_pair = {d.locations: d for d in c.differences}
    assert set(by_pair) == {("out", "o1"), ("out", "d1"), ("o1", "d1")} and {d.method for d in c.differences} == {"tian"}
    d = by_pair[("out", "o1")]
    assert d.kind == "different loops opened"
    assert any(lp.endswith("out -cc-> cz -rz-> o1 -m6(g>d)-> out") for lp in d.loops)
    assert "o1 opens loop 1.2 which out leaves closed" in d.explanation
    # d1 is the first stage's mirror input: the global loops 1.1 and 1.3 (out -> o1 -> out, directly and through Cc) pass it
    # inside the stage, along with the route through the tail that bypasses it (circuits/miller_buffer.cir: M3 d1 d1 vdd)
    assert "out opens loops 1.1, 1.3, which pass d1 inside a stage" in by_pair[("out", "d1")].explanation
    assert c.poles_agree is True
    pz = _pz_poles(MILLER, "inp 0 out 0", tmp_path)
    expected = max((p for p in pz if p.imag >= 0), key=lambda p: p.real)  # reference: ngspice .pz, least damped pole
    for r in c.results:
        assert abs(dominant_pole(r) - expected) < 1e-4 * abs(expected)  # .pz prints 6 significant digits


@pytest.mark.ngspice
def test_miller_same_loops_differ_by_loading(tmp_path):
    """out and o1 with their default sides open the same listed loops (the Miller loop stays closed at both): the difference is put down to the transistors' unlisted loops."""
    c = compare(MILLER, ["out", "o1"])
    (d,) = c.differences
    assert d.kind == "loading"
    assert "both leave 1.2 closed" in d.explanation and "capacitances" in d.explanation
    assert d.max_relative_difference > 1e-3


# -- without ngspice: the explanation logic on a fake simulator --------------------------------


def _fake(t_n0, t_b1, nodes: tuple[str, str] = ("n0", "b1")) -> AnalyticSimulator:
    """Probe vectors of ideal-voltage-driver breaks at two nodes (n0 and b1) with the given T: v_b1 = 1/(1+T), v_a1 = -T/(1+T), i_b2 = 0."""
    def va(t, src):
        return lambda f, ac: -t(f) / (1 + t(f)) * ac[src]

    def vb(t, src):
        return lambda f, ac: 1 / (1 + t(f)) * ac[src]

    a, b = nodes
    return AnalyticSimulator({
        f"v({a}_drive)": va(t_n0, "vnl_series"), f"v({a})": vb(t_n0, "vnl_series"), "i(vnl_series)": lambda f, ac: 0 * f,
        f"v({b}_drive)": va(t_b1, "vnl_series_2"), f"v({b})": vb(t_b1, "vnl_series_2"), "i(vnl_series_2)": lambda f, ac: 0 * f,
    })


def test_fake_equal_t_on_single_loop_is_same(single):
    """Identical T at two one-way breaks of a single loop is reported as the same, with agreeing poles."""
    t = lambda f: _closed_form(f, A0)  # noqa: E731
    c = compare(single, ["n0", "b1"], sweep=FIXED, simulator=_fake(t, t))
    (d,) = c.differences
    assert d.kind == "same" and d.max_relative_difference == 0.0
    assert c.poles_agree is True


def test_fake_different_t_on_single_loop_is_a_defect(single):
    """A 1 % difference of T between two one-way breaks of one single loop is reported as a defect, and the shifted poles disagree when far apart."""
    c = compare(single, ["n0", "b1"], sweep=FIXED, simulator=_fake(lambda f: _closed_form(f, A0), lambda f: _closed_form(f, 1.01 * A0)))
    (d,) = c.differences
    assert d.kind == "defect" and d.max_relative_difference == pytest.approx(0.01 / 1.01, rel=1e-6)  # |T_b - T_a| / |T_b|
    assert c.defects == (d,)
    far = compare(single, ["n0", "b1"], sweep=FIXED, simulator=_fake(lambda f: _closed_form(f, A0), lambda f: _closed_form(f, 2.0 * A0)))
    # closed-loop poles move with sqrt(gain) for this loop (numpy.roots of 1 + T): 2x gain is ~40 % apart, beyond POLE_RTOL
    pa, pb = (max(_closed_loop_poles(g), key=lambda p: p.imag) for g in (A0, 2 * A0))
    assert abs(pa - pb) > POLE_RTOL * abs(pa)
    assert far.poles_agree is False


def test_the_comparisons_verdict_is_its_locations_combined(single):
    """Every location passing gives "pass"; one location failing a requirement gives "fail" (combined_verdict), and
    passed follows the verdict. The closed form: A0 = 1000 with poles at 1 kHz and 1 MHz has a phase margin of about
    52 deg (|T| = 1 near 786 kHz), so pm >= 45 holds at both breaks and pm >= 60 at neither."""
    t = lambda f: _closed_form(f, A0)  # noqa: E731
    fc = brentq(lambda f: abs(_closed_form(f, A0)) - 1, 1e3, 1e9)
    pm = 180 - math.degrees(math.atan(fc / F1) + math.atan(fc / F2))
    assert 45 < pm < 60
    met = compare(single, ["n0", "b1"], sweep=FIXED, simulator=_fake(t, t), requirements=["pm>=45"])
    assert [r.verdict for r in met.results] == ["pass", "pass"] and (met.verdict, met.passed) == ("pass", True)
    missed = compare(single, ["n0", "b1"], sweep=FIXED, simulator=_fake(t, t), requirements=["pm>=60"])
    assert [r.verdict for r in missed.results] == ["fail", "fail"] and (missed.verdict, missed.passed) == ("fail", False)


def test_t_differs_beyond_the_tolerance_only():
    """Two T differ when their largest relative difference exceeds T_RTOL; exactly T_RTOL is the same T."""
    from netloop.jobs.compare_explain import T_RTOL, Difference

    def difference(rel):
        return Difference(("a", "b"), "tian", "same", rel, "")

    assert [difference(r).differs for r in (0.0, T_RTOL, 2 * T_RTOL, 0.01)] == [False, False, True, True]


def test_bad_locations_fail_before_simulating(single):
    """Fewer than two locations, a node given twice and a driver for an absent location are ProbeErrors raised before any job runs."""
    sim = AnalyticSimulator({})
    with pytest.raises(ProbeError, match="at least two"):
        compare(single, ["out"], simulator=sim)
    with pytest.raises(ProbeError, match="more than once"):
        compare(single, ["out", "OUT"], simulator=sim)
    with pytest.raises(ProbeError, match="not among the locations"):
        compare(single, ["out", "n0"], drivers={"p1": "r1"}, simulator=sim)
    assert sim.jobs == []


@pytest.mark.ngspice
def test_hierarchical_locations_inside_instances():
    """In the two-channel readout, out1 and xa1.o1 (inside an instance) open the same loops of channel 1 and leave its Cc/Rz loop closed, while out2 is on the other loop group."""
    c = compare(ROOT / "circuits" / "hier" / "top.cir", ["out1", "xa1.o1", "out2"])
    by_pair = {d.locations: d for d in c.differences}
    inside = by_pair[("out1", "xa1.o1")]
    assert inside.kind == "loading" and "both leave 1.2 closed" in inside.explanation  # 1.2: o1 -m6-> out1 -cc-> cz -rz-> o1
    assert inside.loops and all(lp.startswith("loop 1.") for lp in inside.loops)
    assert by_pair[("out1", "out2")].kind == "different loop groups"
    assert by_pair[("xa1.o1", "out2")].kind == "different loop groups"
    (check,) = c.pole_checks  # only the two locations of channel 1 share a group
    assert check.locations == ("out1", "xa1.o1") and check.agree is True


@pytest.mark.ngspice
def test_a_location_the_loop_bypasses(tmp_path):
    """In the linear reverse-path loop, a (Cbr kept with G1, as the circuit's header says) and b open the same Rl/Rs2 path and agree exactly; s cuts G1's input and also opens the local loop through Cbr, which the difference says; all find ngspice's .pz dominant pole."""
    path = ROOT / "circuits" / "testbench" / "reverse_path.cir"
    c = compare(path, ["a", "b", "s"])
    by_pair = {d.locations: d for d in c.differences}
    assert by_pair[("a", "b")].kind == "same" and by_pair[("a", "b")].max_relative_difference < 1e-6
    local = by_pair[("a", "s")]
    assert local.kind == "different loops opened"
    assert "s opens loop 1.1 which a leaves closed" in local.explanation and local.loops == ("loop 1.1: s -g1(cp>p)-> a -cbr-> s",)
    assert c.poles_agree is True
    pz = _pz_poles(path, "in 0 a 0", tmp_path)
    expected = max((p for p in pz if p.imag >= 0), key=lambda p: p.real)  # reference: ngspice .pz, least damped pole
    for r in c.results:
        assert abs(dominant_pole(r) - expected) < 1e-4 * abs(expected)  # .pz prints 6 significant digits


# -- word for word: the messages and records a user reads ---------------------------------------


def test_a_location_given_twice_is_named_alone(single):
    """The error for a repeated location names only the repeated one, however it was spelt, not the others."""
    sim = AnalyticSimulator({})
    # common practice: an error names what is wrong, not every input beside it
    with pytest.raises(ProbeError) as caught:
        compare(single, ["n0", "OUT", "b1", " out "], simulator=sim)
    assert str(caught.value) == "location out given more than once"
    assert sim.jobs == []


def test_a_simulator_failure_names_the_comparison(single):
    """A simulator that cannot answer the comparison's job fails with the job called "compare" in its message."""
    # netloop.errors.SimulationError: "[label] message" names the job a failure belongs to (as a corner's name does)
    with pytest.raises(SimulationError) as caught:
        compare(single, ["n0", "b1"], sweep=FIXED, simulator=AnalyticSimulator({}))
    assert caught.value.corner == "compare"
    assert str(caught.value).startswith("[compare] the analytic simulator has no response for ")


def test_fake_defect_explanation_word_for_word(single):
    """The defect of a single linear loop says why T must be identical, by how much it differs, and names the loop."""
    c = compare(single, ["n0", "b1"], sweep=FIXED, simulator=_fake(lambda f: _closed_form(f, A0), lambda f: _closed_form(f, 1.01 * A0)))
    (d,) = c.differences
    # |T_b - T_a| / |T_b| = 0.01 / 1.01 = 0.0099 at every frequency (closed form of the two fake loops)
    assert d.explanation == ("DEFECT: both breaks open the single loop of loop 1 (out), made of controlled sources and R, L, C only, so "
                             "T must be identical, but it differs (max relative difference of T 0.0099 > 1e-06): the probe or the "
                             "simulation is wrong")
    assert d.loops == ("loop 1.1: n0 -r1-> p1 -eb(cp>p)-> b1 -r2-> out -e0(cn>p)-> n0",)


def test_fake_different_groups_carry_their_difference(tmp_path):
    """Breaks on two separate loops whose gains are 1000 and 100 report different loop groups with a relative difference of 0.9."""
    path = tmp_path / "two.cir"
    path.write_text("two behavioural loops (invented)\n" + _loop("a", A0) + "\n" + _loop("b", 100.0) + "\n.end\n")
    c = compare(path, ["n0a", "b1b"], sweep=FIXED,
                simulator=_fake(lambda f: _closed_form(f, A0), lambda f: _closed_form(f, 100.0), nodes=("n0a", "b1b")))
    (d,) = c.differences
    # closed form: both loops share their poles, so |T_a - T_b| / |T_a| = (1000 - 100) / 1000 = 0.9 at every frequency
    assert d.kind == "different loop groups" and d.differs
    assert d.max_relative_difference == pytest.approx(0.9, rel=1e-12)


def test_fake_both_methods_agree_at_every_location(single):
    """With both methods, each location adds a Tian-against-Middlebrook entry after the location pairs, "same" with no difference."""
    t = lambda f: _closed_form(f, A0)  # noqa: E731
    c = compare(single, ["n0", "b1"], method="both", sweep=FIXED, simulator=_fake(t, t))
    # Tian et al. (2001) and Middlebrook (1975) give one T from the same two runs of this probe (netloop.analysis.return_ratio)
    assert [(d.locations, d.method, d.kind, d.max_relative_difference) for d in c.differences[1:]] == [
        (("n0", "n0"), "tian/middlebrook", "same", 0.0), (("b1", "b1"), "tian/middlebrook", "same", 0.0)]


@pytest.mark.parametrize("kvl", [True, False])
def test_methods_differ_only_when_the_probe_equations_fail(kvl):
    """Tian's and Middlebrook's T from probe quantities that obey the probe's equations are "same"; quantities that break them are a "defect" of the two methods."""
    rng = np.random.default_rng(1)
    vb1, ib2 = rng.normal(size=(2, 50)) + 1j * rng.normal(size=(2, 50))
    va1 = vb1 - 1 if kvl else vb1 - 0.9  # the series source: v_b - v_a = 1 V (Kirchhoff's voltage law); 0.9 V is a broken probe
    tt, tm = tian(va1, vb1, ib2), middlebrook(va1, vb1, ib2 - 1, ib2)  # Tian et al. 2001; Middlebrook 1975 (i_a2 = i_b2 - 1, KCL)
    d = method_difference("out", tt, tm)
    assert (d.locations, d.method, d.kind) == (("out", "out"), "tian/middlebrook", "same" if kvl else "defect")
    assert d.explanation.startswith("Tian's and Middlebrook's T agree at out" if kvl else "DEFECT: at out Middlebrook's T differs from Tian's")


def _difference(tmp_path: Path, text: str, a: str, b: str):
    """The one Difference of comparing ``a`` and ``b`` in the netlist ``text`` on ngspice over the fixed sweep."""
    path = tmp_path / "circuit.cir"
    path.write_text(text)
    (d,) = compare(path, [a, b], sweep=FIXED).differences
    return d


NESTED = "nested local loops around a buffer (invented)\n" + _loop("", A0) + """
ef x 0 b1 0 -0.5
rf x p1 1k
eg y 0 x 0 1
rg y b1 1k
.end
"""


@pytest.mark.ngspice
def test_loops_one_location_opens_bypass_the_other(tmp_path):
    """With local loops b1 -> x -> y -> b1 and p1 -> b1 -> x -> p1 beside the global loop, y and p1 each name the loops they open that never pass the other, in the singular and the plural."""
    d = _difference(tmp_path, NESTED, "y", "p1")
    assert d.kind == "different loops opened"
    # by inspection of the netlist (netloop.graph.find_loops lists them): 1.1 b1 -ef-> x -eg-> y -rg-> b1 does not pass p1;
    # 1.2 p1 -eb-> b1 -ef-> x -rf-> p1 and 1.3 n0 -r1-> p1 -eb-> b1 -r2-> out -e0-> n0 do not pass y
    assert "y opens loop 1.1 which bypasses p1; p1 opens loops 1.2, 1.3 which bypass y;" in d.explanation
    assert {"loop 1.1: b1 -ef(cp>p)-> x -eg(cp>p)-> y -rg-> b1", "loop 1.2: p1 -eb(cp>p)-> b1 -ef(cp>p)-> x -rf-> p1",
            "loop 1.3: n0 -r1-> p1 -eb(cp>p)-> b1 -r2-> out -e0(cn>p)-> n0"} <= set(d.loops)


SENSED = """error amplifier: a behavioural gain stage and a transistor in parallel, the stage through a 0 V current sense (invented)
vdd vdd 0 dc 1.8
vref ref 0 dc 0.5
rd vdd n0 10k
e1 n0x 0 ref out 1000
vsense n0x n0 0
m1 n0 out 0 0 nch w=1u l=1u
r1 n0 p1 1k
c1 p1 0 159.15n
eb b1 0 p1 0 1
r2 b1 out 1k
c2 out 0 159.15p
.model nch nmos level=1 vto=0.4 kp=100u
.end
"""


@pytest.mark.ngspice
def test_a_step_entering_through_a_current_sense_is_placed_by_its_other_element(tmp_path):
    """A break at n0, which the loop enters through e1 behind a 0 V sense source and m1 in parallel, opens the loop as b1 does, and T agrees."""
    d = _difference(tmp_path, SENSED, "n0", "b1")
    # by inspection: the one loop out -e1|m1-> n0 -r1-> p1 -eb-> b1 -r2-> out enters n0 from its drivers (m1 and, through vsense,
    # e1) and leaves by r1; n0 and b1 are both held by ideal voltage sources (e1, eb): zero driver impedance, so neither break
    # loads the loop and T is its voltage gain around, the same at both (circuit theory, from memory; 1 + T_n = D/D_n)
    assert d.kind == "same" and d.max_relative_difference < 1e-9
    assert d.explanation.startswith("both open the same loops of loop 1 (out) (1.1); T agrees")


def test_a_looked_through_node_is_explained_loop_by_loop_in_the_singular_and_plural():
    """On the Miller buffer (circuits/miller_buffer.cir, read by hand: loops 1.1 out -> o1 -> out through the pair and its
    mirror, 1.2 the Cc/Rz loop, 1.3 through the pair and Cc), o1 broken with Rz on its driver side opens 1.1 and 1.2; d1,
    the mirror's input, is looked through: 1.1 passes it inside the first stage, 1.2 bypasses it. Each is named in its own
    words, singular; a location on no loop is named with the pair it belongs to."""
    from netloop.graph import find_loops, flatten
    from netloop.jobs.compare_explain import Place, explain, place
    from netloop.netlist import parse_file
    from netloop.probe import break_loop

    parsed = parse_file(MILLER)
    original = flatten(parsed)
    found = find_loops(original)
    o1 = place(break_loop(parsed, "o1", driver="m2.d,m4.d,rz.p"), found, original)
    d1 = place(break_loop(parsed, "d1"), found, original)
    assert (o1.opened, d1.opened, d1.inside) == ((1, 2), (), (1, 3))
    d = explain(d1, o1, "tian", 0.5)
    assert (d.locations, d.method, d.kind) == (("d1", "o1"), "tian", "different loops opened")
    assert ("the breaks open different loops: o1 opens loop 1.1, which passes d1 inside a stage (d1 is looked through, a current "
            "mirror's input or a pair's tail: a break there opens only the routes through it); o1 opens loop 1.2 which bypasses "
            "d1; a loop left closed is part of T") in d.explanation
    alone = explain(Place("bias", None, (), ()), o1, "middlebrook", 0.5)
    assert (alone.locations, alone.method, alone.kind) == (("bias", "o1"), "middlebrook", "not on a listed loop")
    assert alone.explanation.startswith("bias is on no loop the loop discovery lists, nor in a passive network such a loop crosses")
