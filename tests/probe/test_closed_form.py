"""The probe's T against a closed form derived by hand, and Tian against Middlebrook, through ngspice."""

from __future__ import annotations

import numpy as np
import pytest

from netloop.analysis.return_ratio import middlebrook, tian
from netloop.netlist import parse_text
from netloop.probe import break_loop

from .conftest import probe_runs

# Values keep |T| above 1e-4 up to 10 GHz: T is found to about 1e-16 absolute (double precision), so a
# 1e-9 relative check needs |T| well above 1e-7.
A0, R1, C1, GM, RO, RF1, RF2, CL = 10.0, 1e3, 1.59e-9, 1e-3, 1e5, 1e5, 1e5, 1e-15

# Behavioural loop (invented): inverting VCVS gain A0 on the divided output, an RC pole, a
# transconductance driver with output resistance Ro and load capacitance CL at node out.
BEHAVIOURAL = f"""behavioural loop with a closed-form return ratio
E1 n1 0 0 inn {A0}
R1 n1 n2 {R1}
C1 n2 0 {C1}
G1 0 out n2 0 {GM}
Ro out 0 {RO}
CL out 0 {CL}
Rf1 out inn {RF1}
Rf2 inn 0 {RF2}
Vbias bias 0 dc 1 ac 1
Rbias bias inn 1e9
"""


def closed_form_t(freq_hz):
    """T(s) by hand: break at out, drive the load side with v_b, return -v_a/v_b with the driver loaded by the load side.

    v_inn = beta v_b (beta = Rf2/(Rf1+Rf2), loaded by Rbias to AC ground: Rf2 || Rbias), v_n1 = -A0 v_inn,
    v_n2 = v_n1/(1 + s R1 C1), G1 pushes gm v_n2 into a, which sees Ro || CL || (Rf1 + Rf2 || Rbias):
    v_a = gm v_n2 Z  so  T = -v_a/v_b = A0 beta gm Z / (1 + s R1 C1).
    """
    s = 2j * np.pi * np.asarray(freq_hz)
    rf2 = RF2 * 1e9 / (RF2 + 1e9)
    beta = rf2 / (RF1 + rf2)
    z = 1.0 / (1.0 / RO + s * CL + 1.0 / (RF1 + rf2))
    return A0 * beta * GM * z / (1.0 + s * R1 * C1)


@pytest.mark.ngspice
def test_behavioural_loop_matches_closed_form(simulator):
    """Tian's T from the two probe runs equals the hand-derived T(s) within 1e-9 relative from 1 Hz to 10 GHz."""
    p = break_loop(parse_text(BEHAVIOURAL), "out")
    assert p.driver_terminals == ("g1.n",)
    freq, q, _ = probe_runs(simulator, p, 1.0, 1e10, 20)
    t = tian(q.va1, q.vb1, q.ib2)
    ref = closed_form_t(freq)  # closed form derived by hand in closed_form_t's docstring
    assert np.real(t[0]) > 0  # negative feedback: T positive and real at low frequency (DEVELOPERS.md convention)
    assert np.max(np.abs(t - ref) / np.abs(ref)) < 1e-9


@pytest.mark.ngspice
def test_shunt_elements_either_side(simulator):
    """Moving Ro and CL (node to AC ground only) to the driver side leaves T unchanged, as decided_by says."""
    nl = parse_text(BEHAVIOURAL)
    default = break_loop(nl, "out")
    moved = break_loop(nl, "out", driver="g1,ro,cl")
    assert set(moved.driver_terminals) == {"g1.n", "ro.p", "cl.p"}
    _, q1, _ = probe_runs(simulator, default, 1.0, 1e10, 5)
    _, q2, _ = probe_runs(simulator, moved, 1.0, 1e10, 5)
    t1, t2 = tian(q1.va1, q1.vb1, q1.ib2), tian(q2.va1, q2.vb1, q2.ib2)
    assert np.max(np.abs(t1 - t2) / np.abs(t1)) < 1e-9


@pytest.mark.ngspice
def test_tian_equals_middlebrook_without_bypass(simulator):
    """Where every path passes the break, Middlebrook's double injection and Tian's formula give the same T as the closed form."""
    p = break_loop(parse_text(BEHAVIOURAL), "out", driver="g1,ro")
    freq, q, _ = probe_runs(simulator, p, 1.0, 1e10, 10)
    t_tian = tian(q.va1, q.vb1, q.ib2)
    t_mb = middlebrook(q.va1, q.vb1, q.ia2, q.ib2)
    ref = closed_form_t(freq)  # hand-derived closed form
    assert np.max(np.abs(t_mb - ref) / np.abs(ref)) < 1e-9
    assert np.max(np.abs(t_mb - t_tian) / np.abs(t_tian)) < 1e-9


@pytest.mark.ngspice
def test_tian_equals_middlebrook_with_bypass(simulator):
    """With a bypass path around the break (Rbyp from n2 to out) the two formulas still agree, being algebraically identical given the same runs, while T itself changes."""
    bypassed = parse_text(BEHAVIOURAL + "Rbyp n2 out 20k\n")
    p = break_loop(bypassed, "out")
    freq, q, _ = probe_runs(simulator, p, 1.0, 1e10, 10)
    t_tian = tian(q.va1, q.vb1, q.ib2)
    t_mb = middlebrook(q.va1, q.vb1, q.ia2, q.ib2)
    # Tian et al. (2001) and Middlebrook (1975) reduce to the same expression once ia2 = ib2 - 1 and vb1 - va1 = 1
    assert np.allclose(q.vb1 - q.va1, 1.0, rtol=0, atol=1e-12) and np.allclose(q.ib2 - q.ia2, 1.0, rtol=0, atol=1e-12)
    assert np.max(np.abs(t_mb - t_tian) / np.abs(t_tian)) < 1e-9
    assert np.max(np.abs(t_tian - closed_form_t(freq)) / np.abs(closed_form_t(freq))) > 1e-3  # the bypass matters


# The same loop with its bias source (still `ac 1`) inside a subcircuit instance: the probe must silence it there too.
NESTED_BIAS = BEHAVIOURAL.replace(
    "Vbias bias 0 dc 1 ac 1\nRbias bias inn 1e9\n",
    ".subckt biasgen out\nVb b 0 dc 1 ac 1\nRb b out 1e9\n.ends\nXbias inn biasgen\n",
)


@pytest.mark.ngspice
def test_ac_source_inside_a_subcircuit_is_silenced(simulator):
    """A stray `ac 1` source inside a subcircuit instance is set to AC 0 and listed, so T still equals the closed form within 1e-9."""
    assert NESTED_BIAS != BEHAVIOURAL
    p = break_loop(parse_text(NESTED_BIAS), "out")
    assert p.silenced_sources == ("v.xbias.vb",)  # ngspice's flat name of vb inside xbias
    freq, q, _ = probe_runs(simulator, p, 1.0, 1e10, 20)
    t = tian(q.va1, q.vb1, q.ib2)
    ref = closed_form_t(freq)  # the closed form above: Vb is AC ground, Rb the same 1e9 from inn to it
    assert np.max(np.abs(t - ref) / np.abs(ref)) < 1e-9
