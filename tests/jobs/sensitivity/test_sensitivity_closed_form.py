"""Sensitivities and what-ifs of behavioural loops agree with the derivatives and solutions of their closed forms.

Two loops built of ideal controlled sources, R and C, so that ngspice's T is exactly a known rational function:

* a two-pole loop T(s) = A / ((1 + s/w1)(1 + s/w2)) with w2 = 1/(R2 C2) set by the capacitor C2;
* the small-signal model of a Miller-compensated two-stage amplifier, as in Gray, Hurst, Lewis and Meyer,
  Analysis and Design of Analog Integrated Circuits (5th ed., Wiley, 2009), chapter 9, frequency response
  and stability of feedback amplifiers: the compensation of two-stage amplifiers (derived below).

The references are the closed forms themselves (crossovers solved with scipy's brentq, derivatives by
implicit differentiation, written out here) and python-control 0.10's stability_margins on the same T(s).
"""

from __future__ import annotations

import math
from pathlib import Path

import control
import numpy as np
import pytest
from scipy.optimize import brentq

from netloop.jobs.sensitivity import sensitivities
from netloop.sim import SharedLibrarySimulator

LN10 = math.log(10.0)

# ---- the two-pole loop -------------------------------------------------------------------------------------
GM1, R1, GM2, R2 = 1e-3, 1e6, 1e-3, 1e4
A = GM1 * R1 * GM2 * R2  # 1e4: 80 dB
W1 = 2 * math.pi * 100.0  # first pole 100 Hz
C1 = 1 / (W1 * R1)
C2 = 1 / (2 * math.pi * 1e6 * R2)  # second pole 1 MHz, set by C2 alone
TWO_POLE = f"""two-pole loop: T(s) = A / ((1 + s/w1)(1 + s/w2)), w2 = 1/(R2 C2)
* G1 drives gm1 (v(in) - v(out)) into n1 (R1 || C1), G2 drives gm2 v(n1) into n2 (R2 || C2), E3 buffers n2 to out;
* the loop closes where out reaches G1's control input: T = gm1 R1 gm2 R2 / ((1 + s R1 C1)(1 + s R2 C2)) exactly
Vin in 0 dc 0 ac 1
G1 0 n1 in out {GM1!r}
R1 n1 0 {R1!r}
C1 n1 0 {C1!r}
G2 0 n2 n1 0 {GM2!r}
R2 n2 0 {R2!r}
C2 n2 0 {C2!r}
E3 out 0 n2 0 1
.end
"""


def two_pole_crossover(c2: float) -> float:
    """wc from |T(j wc)| = 1: (1 + a/w1^2)(1 + a/w2^2) = A^2 with a = wc^2, the positive root of the quadratic."""
    w2 = 1 / (R2 * c2)
    qa, qb, qc = 1 / (W1**2 * w2**2), 1 / W1**2 + 1 / w2**2, 1 - A**2
    a = (-qb + math.sqrt(qb * qb - 4 * qa * qc)) / (2 * qa)
    return math.sqrt(a)


def two_pole_pm_deg(c2: float) -> float:
    """PM = 180 - atan(wc/w1) - atan(wc/w2) (degrees)."""
    wc, w2 = two_pole_crossover(c2), 1 / (R2 * c2)
    return 180 - math.degrees(math.atan(wc / W1) + math.atan(wc / w2))


def two_pole_slopes(c2: float) -> tuple[float, float]:
    """(dPM/dln C2 in degrees, dfc/dln C2 in Hz) by implicit differentiation of F(a, w2) = (1 + a/w1^2)(1 + a/w2^2) - A^2."""
    wc, w2 = two_pole_crossover(c2), 1 / (R2 * c2)
    a = wc * wc
    f_a = (1 + a / w2**2) / W1**2 + (1 + a / W1**2) / w2**2
    f_w2 = (1 + a / W1**2) * (-2 * a / w2**3)
    dwc_dw2 = (-f_w2 / f_a) / (2 * wc)
    # PM(wc, w2) = pi - atan(wc/w1) - atan(wc/w2)
    dpm_dw2 = -((1 / W1) / (1 + (wc / W1) ** 2) + (1 / w2) / (1 + (wc / w2) ** 2)) * dwc_dw2 + (wc / w2**2) / (1 + (wc / w2) ** 2)
    dw2_dln_c2 = -w2  # w2 = 1/(R2 C2)
    return math.degrees(dpm_dw2 * dw2_dln_c2), dwc_dw2 * dw2_dln_c2 / (2 * math.pi)


def two_pole_c2_for_pm(pm_deg: float) -> float:
    """The C2 that gives phase margin pm_deg, in closed form.

    With alpha = atan(wc/w1), beta = atan(wc/w2) and theta = 180 - PM: alpha + beta = theta, and |T| = 1 gives
    cos(alpha) cos(beta) = 1/A, i.e. cos(2 alpha - theta) = 2/A - cos(theta); the root with alpha > theta/2
    is the one where w1 is the dominant pole. Then wc = w1 tan(alpha), w2 = wc / tan(theta - alpha).
    """
    theta = math.radians(180 - pm_deg)
    alpha = (theta + math.acos(2 / A - math.cos(theta))) / 2
    wc = W1 * math.tan(alpha)
    w2 = wc / math.tan(theta - alpha)
    return 1 / (R2 * w2)


def two_pole_tf(c2: float):
    w2 = 1 / (R2 * c2)
    return control.tf([A], [1 / (W1 * w2), 1 / W1 + 1 / w2, 1])


# ---- the Miller two-stage small-signal model --------------------------------------------------------------
MG1, MR1, MC1 = 1e-4, 1e6, 0.1e-12  # first stage: gm1, its output resistance and capacitance (node 1)
MG2, MR2, MC2 = 1e-3, 1e5, 2e-12  # second stage: gm2, output resistance and load capacitance (node out)
CC = 0.4e-12  # the Miller capacitor, from node 1 to out
MILLER = f"""Miller-compensated two-stage small-signal model
* G1 drives gm1 (v(out) - v(in)) into node n1 (R1 || C1); G2 draws gm2 v(n1) from out (R2 || C2); Cc from n1 to out;
* the loop closes where out reaches G1's control input
Vin in 0 dc 0 ac 1
G1 0 n1 out in {MG1!r}
R1 n1 0 {MR1!r}
C1 n1 0 {MC1!r}
G2 out 0 n1 0 {MG2!r}
R2 out 0 {MR2!r}
C2 out 0 {MC2!r}
Cc n1 out {CC!r}
.end
"""
# Nodal equations with the loop opened at G1's control input (v_x there, v(in) = 0), G_k = 1/R_k:
#   node 1:  v1 (G1 + s C1) + s Cc (v1 - vo) = gm1 v_x
#   out:     vo (G2 + s C2) + s Cc (vo - v1) = -gm2 v1
# The second gives v1 = vo (G2 + s (C2 + Cc)) / (s Cc - gm2); into the first:
#   vo [(G1 + s (C1 + Cc))(G2 + s (C2 + Cc)) - s Cc (s Cc - gm2)] = gm1 v_x (s Cc - gm2),
# so T = -vo/v_x = gm1 gm2 R1 R2 (1 - s Cc/gm2) / (1 + s b1 + s^2 b2) with
#   b1 = R1 (C1 + Cc) + R2 (C2 + Cc) + gm2 R1 R2 Cc,   b2 = R1 R2 (C1 C2 + Cc (C1 + C2)),
# the textbook's two-stage transfer function (one right-half-plane zero at gm2/Cc, pole splitting).
MA = MG1 * MR1 * MG2 * MR2
MILLER_DRIVER = "g2,cc.n"  # the second stage and its Miller capacitor drive out: the loop above is opened at G1's input


def _b(cc: float) -> tuple[float, float]:
    return MR1 * (MC1 + cc) + MR2 * (MC2 + cc) + MG2 * MR1 * MR2 * cc, MR1 * MR2 * (MC1 * MC2 + cc * (MC1 + MC2))


def miller_t(w: float, cc: float) -> complex:
    s = 1j * w
    b1, b2 = _b(cc)
    return MA * (1 - s * cc / MG2) / (1 + s * b1 + s * s * b2)


def miller_crossover(cc: float) -> float:
    """wc from |T(j wc)| = 1 (brentq in log w; |T| falls monotonically through 1 here)."""
    return math.exp(brentq(lambda u: abs(miller_t(math.exp(u), cc)) - 1, math.log(1e5), math.log(1e10), xtol=1e-15))


def miller_pm_deg(cc: float) -> float:
    wc = miller_crossover(cc)
    return 180 + math.degrees(np.angle(miller_t(wc, cc)))  # the phase at crossover lies in (-180, 0)


def miller_slopes(cc: float) -> tuple[float, float]:
    """(dPM/dln Cc in degrees, dfc/dln Cc in Hz): with L + j phi = ln T(j w; Cc), wc keeps L = 0, so
    dwc/dCc = -L_Cc / L_w and dPM/dCc = phi_Cc + phi_w dwc/dCc; the partial derivatives of ln T are exact."""
    wc = miller_crossover(cc)
    s = 1j * wc
    b1, b2 = _b(cc)
    n = 1 - s * cc / MG2
    d = 1 + s * b1 + s * s * b2
    db1, db2 = MR1 + MR2 + MG2 * MR1 * MR2, MR1 * MR2 * (MC1 + MC2)
    dln_dcc = (-s / MG2) / n - (s * db1 + s * s * db2) / d
    dln_dw = (-1j * cc / MG2) / n - (1j * b1 + 2 * s * 1j * b2) / d
    dwc_dcc = -dln_dcc.real / dln_dw.real
    dpm_dcc = dln_dcc.imag + dln_dw.imag * dwc_dcc
    return math.degrees(dpm_dcc * cc), dwc_dcc * cc / (2 * math.pi)


def miller_tf(cc: float):
    b1, b2 = _b(cc)
    return control.tf([-MA * cc / MG2, MA], [b2, b1, 1])


# ---- runs ---------------------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def simulator():
    with SharedLibrarySimulator() as sim:
        yield sim


@pytest.fixture(scope="module")
def two_pole(tmp_path_factory, simulator):
    path = tmp_path_factory.mktemp("two_pole") / "two_pole.cir"
    path.write_text(TWO_POLE)
    return sensitivities(path, "out", knobs=["c2"], requirements=["pm>=60"], solve=["c2"], simulator=simulator)


@pytest.fixture(scope="module")
def miller(tmp_path_factory, simulator):
    path = tmp_path_factory.mktemp("miller") / "miller.cir"
    path.write_text(MILLER)
    return sensitivities(path, "out", driver=MILLER_DRIVER, knobs=["cc"], requirements=["pm>=60"], solve=["cc"], simulator=simulator)


def _python_control(tf) -> tuple[float, float]:
    """(PM in degrees, crossover in Hz) by python-control 0.10 stability_margins."""
    _gm, pm, _sm, _wpc, wgc, _wms = control.stability_margins(tf)
    return pm, wgc / (2 * math.pi)


@pytest.mark.ngspice
def test_two_pole_slopes_match_the_closed_form(two_pole):
    """netloop's dPM/dlog10 C2 and dfc/dlog10 C2 of the two-pole loop equal the closed form's derivatives to 1e-3."""
    s = two_pole.sensitivities[0]
    dpm, dfc = two_pole_slopes(C2)  # closed form, implicit differentiation (above)
    assert s.pm.per_decade == pytest.approx(dpm * LN10, rel=1e-3)
    assert s.fc.per_decade == pytest.approx(dfc * LN10, rel=1e-3)
    assert two_pole.nominal.analysis.margins.phase_margin_deg == pytest.approx(two_pole_pm_deg(C2), abs=1e-4)


@pytest.mark.ngspice
def test_two_pole_slopes_match_python_control(two_pole):
    """The same slopes by python-control's stability_margins at the values netloop simulated (x e^+-h)."""
    s = two_pole.sensitivities[0]
    h = two_pole.step
    plus, minus = _python_control(two_pole_tf(C2 * math.exp(h))), _python_control(two_pole_tf(C2 * math.exp(-h)))
    assert s.pm.per_decade == pytest.approx((plus[0] - minus[0]) / (2 * h) * LN10, rel=1e-5)
    assert s.fc.per_decade == pytest.approx((plus[1] - minus[1]) / (2 * h) * LN10, rel=1e-5)


@pytest.mark.ngspice
def test_two_pole_what_if_matches_the_closed_form(two_pole):
    """The C2 netloop solves for pm>=60 equals the closed-form C2 to 1e-4, and the fresh measurement with it meets pm>=60.

    The PM it saw on the way falls as C2 grows (w2 = 1/(R2 C2) falls toward the crossover): the what-if says monotonic."""
    w = two_pole.what_ifs[0]
    assert w.solved_value == pytest.approx(two_pole_c2_for_pm(60.0), rel=1e-4)
    assert w.monotonic is True and w.answer == ""
    pms = [pm for _factor, pm in w.tried]
    assert pms == sorted(pms, reverse=True)  # the closed form's direction, in the values netloop tried
    assert w.confirmed and w.check.analysis.margins.phase_margin_deg == pytest.approx(60.0, abs=1e-3)
    assert _python_control(two_pole_tf(w.solved_value))[0] == pytest.approx(60.0, abs=1e-3)  # python-control agrees
    assert w.edited == f"C2 n2 0 {w.solved_value!r}"  # the card to write: the netlist's C2 card with the solved value


@pytest.mark.ngspice
def test_two_pole_what_ifs_name_the_card_to_write_or_the_best_the_closed_form_gives(tmp_path, simulator):
    """Solved in one run (not through the module's fixture, so that mutmut maps this test to the what-if), P given as 0
    (and kept for every loop measured afresh): pm>=60 gives
    the card to write, the netlist's C2 card with the solved value; pm>=89 is out of reach between 0.1x and 10x C2 (the
    closed form's PM rises as C2 falls, to below 89 deg at 0.1x): that what-if keeps its knob, solves no value, writes no
    card, and its answer names the best PM, python-control's PM of the closed form at 0.1x C2, to its two decimals."""
    path = tmp_path / "two_pole.cir"
    path.write_text(TWO_POLE)
    run = sensitivities(path, "out", knobs=["c2"], requirements=["pm>=60", "pm>=89"], solve=["c2"], simulator=simulator,
                        open_loop_rhp_poles=0)
    solved, out_of_reach = run.what_ifs
    assert solved.solved_value == pytest.approx(two_pole_c2_for_pm(60.0), rel=1e-4)
    assert solved.monotonic is True  # the closed form's PM moves one way with C2
    # P given (0: the two-pole loop is stable when opened) holds for the loop measured afresh too, as for the nominal
    assert run.nominal.analysis.nyquist.open_loop_rhp_from == solved.check.analysis.nyquist.open_loop_rhp_from == "given"
    assert solved.edited == f"C2 n2 0 {solved.solved_value!r}"
    best = _python_control(two_pole_tf(0.1 * C2))[0]
    assert best < 89.0 < _python_control(two_pole_tf(0.01 * C2))[0]  # reachable only below the range searched
    assert out_of_reach.knob == run.sensitivities[0].knob and out_of_reach.knob.element == "c2"
    assert out_of_reach.solved_value is None and out_of_reach.edited is None and out_of_reach.check is None
    assert out_of_reach.answer == f"pm>=89 cannot be reached by c2 alone between 0.1x and 10x: the best is {best:.2f} deg at 0.1x"


@pytest.mark.ngspice
def test_miller_slopes_match_the_textbook_model(miller):
    """netloop's dPM/dlog10 Cc and dfc/dlog10 Cc of the Miller model equal the closed form's derivatives to 1e-3."""
    s = miller.sensitivities[0]
    dpm, dfc = miller_slopes(CC)
    assert s.pm.per_decade == pytest.approx(dpm * LN10, rel=1e-3)
    assert s.fc.per_decade == pytest.approx(dfc * LN10, rel=1e-3)
    pm, fc = _python_control(miller_tf(CC))  # python-control on the closed form: the nominal point
    assert miller.nominal.analysis.margins.phase_margin_deg == pytest.approx(pm, abs=1e-4)
    assert miller.nominal.analysis.margins.unity_gain_hz == pytest.approx(fc, rel=1e-6)


@pytest.mark.ngspice
def test_miller_what_if_matches_the_closed_form(miller):
    """The Cc netloop solves for pm>=60 equals the closed form's root (brentq on its PM) to 1e-4, and meets pm>=60 afresh."""
    cc = brentq(lambda c: miller_pm_deg(c) - 60.0, CC, 10 * CC, xtol=1e-20, rtol=1e-14)
    w = miller.what_ifs[0]
    assert w.solved_value == pytest.approx(cc, rel=1e-4)
    assert w.confirmed and w.check.analysis.margins.phase_margin_deg == pytest.approx(60.0, abs=1e-3)
    assert _python_control(miller_tf(w.solved_value))[0] == pytest.approx(60.0, abs=1e-3)  # python-control agrees


@pytest.mark.ngspice
def test_two_step_sizes_agree(tmp_path, simulator):
    """Central differences with h = 0.01 and h = 0.001 agree to 1e-4 on both loops: the step lies in the flat region."""
    for name, text, knob, driver in (("two_pole", TWO_POLE, "c2", None), ("miller", MILLER, "cc", MILLER_DRIVER)):
        path = tmp_path / f"{name}.cir"
        path.write_text(text)
        coarse, fine = (sensitivities(path, "out", driver=driver, knobs=[knob], step=h, simulator=simulator).sensitivities[0]
                        for h in (0.01, 0.001))
        assert coarse.pm.per_decade == pytest.approx(fine.pm.per_decade, rel=1e-4), name
        assert coarse.fc.per_decade == pytest.approx(fine.fc.per_decade, rel=1e-4), name
        assert coarse.pm.error < 1e-4 * abs(coarse.pm.per_decade), name  # the stated accuracy says so too


@pytest.fixture(scope="module")
def two_pole_path(tmp_path_factory):
    path = tmp_path_factory.mktemp("two_pole_whatif") / "two_pole.cir"
    path.write_text(TWO_POLE)
    return path


@pytest.mark.ngspice
def test_a_met_requirement_finds_how_far_the_value_may_move(two_pole_path, simulator):
    """When the loop already meets pm>=45, the what-if finds the C2 at which it stops: the closed form's, to 1e-4."""
    run = sensitivities(two_pole_path, "out", knobs=["c2"], requirements=["pm>=45"], solve=["c2"], simulator=simulator)
    w = run.what_ifs[0]
    assert w.met_at_value and w.factor > 1
    assert w.solved_value == pytest.approx(two_pole_c2_for_pm(45.0), rel=1e-4)
    assert w.confirmed


@pytest.mark.ngspice
def test_an_unreachable_requirement_is_said_plainly(two_pole_path, simulator):
    """pm>=89 cannot be met by C2 alone between 0.1x and 10x: no value, and the best phase margin seen (at 0.1x) is the
    closed form's there."""
    run = sensitivities(two_pole_path, "out", knobs=["c2"], requirements=["pm>=89"], solve=["c2"], simulator=simulator)
    w = run.what_ifs[0]
    assert w.solved_value is None and w.check is None and w.monotonic
    assert w.answer.startswith("pm>=89 cannot be reached by c2 alone between 0.1x and 10x: the best is")
    best_factor, best_pm = max(w.tried, key=lambda fv: fv[1])
    assert best_factor == pytest.approx(0.1)
    assert best_pm == pytest.approx(two_pole_pm_deg(0.1 * C2), abs=1e-3)


@pytest.mark.ngspice
def test_a_knob_whose_value_is_zero_has_no_slope_and_says_why(tmp_path, simulator):
    """A transconductance of 0 in parallel with G2 (it changes nothing) is a knob whose relative change is no change: its
    sensitivity has no slope and says so, and the other knob's slopes are still given."""
    path = tmp_path / "two_pole_zero.cir"
    path.write_text(TWO_POLE.replace("E3 out 0 n2 0 1\n", "E3 out 0 n2 0 1\nGz 0 n2 n1 0 0\n"))
    run = sensitivities(path, "out", knobs=["gz", "c2"], simulator=simulator)
    by = {s.knob.name: s for s in run.sensitivities}
    assert by["gz"].value == 0.0 and by["gz"].problem == "its value is 0: a relative change is no change"
    assert by["gz"].pm.per_decade is None and by["c2"].pm.per_decade is not None


@pytest.mark.ngspice
def test_a_what_if_on_a_figure_the_loop_does_not_have_says_so(tmp_path, simulator):
    """With G1 a hundred-thousandth of its value the loop's gain stays below 1 (A = gm1 R1 gm2 R2, circuit theory): it has no
    phase margin, and a what-if on pm solves nothing and says the measured loop has none to move."""
    assert GM1 * 1e-5 * R1 * GM2 * R2 < 1.0
    path = tmp_path / "two_pole_quiet.cir"
    path.write_text(TWO_POLE.replace(f"G1 0 n1 in out {GM1!r}", f"G1 0 n1 in out {GM1 * 1e-5!r}"))
    run = sensitivities(path, "out", knobs=["c2"], requirements=["pm>=60"], solve=["c2"], simulator=simulator)
    (w,) = run.what_ifs
    assert w.solved_value is None and w.check is None
    assert w.answer == "the measured loop has no worst phase margin to move", w.answer


@pytest.mark.ngspice
def test_its_own_ngspice_keeps_decks_only_where_asked_and_runs_the_processes_asked(tmp_path, monkeypatch):
    """Without a simulator given, sensitivities starts its own ngspice: processes=2 shares each job's two runs out to two
    ngspice processes (netloop.jobs.measure.simulator_processes: the number given, at most one a run); without keep_decks
    nothing is written where it runs (not even a folder), and with it every deck is kept in that folder (README: `--keep-decks
    DIR` keeps the ngspice decks), the what-if's fresh measurement called by the knob and the solved value it measures."""
    path = tmp_path / "two_pole.cir"
    path.write_text(TWO_POLE)
    work = tmp_path / "work"
    work.mkdir()
    monkeypatch.chdir(work)
    plain = sensitivities(path, "out", knobs=["c2"], processes=2)
    assert (plain.nominal.sim.processes, plain.nominal.sim.deck_path) == (2, None) and plain.sensitivities[0].problem is None
    assert list(work.iterdir()) == []
    decks = tmp_path / "decks"
    kept = sensitivities(path, "out", knobs=["c2"], requirements=["pm>=60"], solve=["c2"], keep_decks=decks)
    (w,) = kept.what_ifs
    assert w.solved_value == pytest.approx(two_pole_c2_for_pm(60.0), rel=1e-4)  # the closed form's C2
    assert {Path(r.sim.deck_path).parent for r in (kept.nominal, w.check)} == {decks} and len(list(decks.glob("*.cir"))) > 2
    name, _, shown = w.check.label.partition(" = ")
    assert name == "c2" and float(shown) == pytest.approx(w.solved_value, rel=1e-5)
    assert Path(w.check.sim.deck_path).name.startswith("c2_") and list(work.iterdir()) == []
