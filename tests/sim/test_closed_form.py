"""Both backends against circuit-theory closed forms: an RC low-pass, superposition, hierarchy."""

from __future__ import annotations

import numpy as np
import pytest

from netloop.sim import AcRun, AcSweep, SimJob

R, C = 1e3, 1e-9
RC_NETLIST = f"""rc low-pass
v1 in 0 dc 1 ac 1
r1 in out {R!r}
c1 out 0 {C!r}
"""


@pytest.mark.ngspice
def test_rc_lowpass_matches_closed_form(simulator):
    """V(out) of an RC low-pass driven with ac 1 equals 1/(1 + j2πfRC) to 1e-9 relative on every point."""
    job = SimJob(
        netlist=RC_NETLIST,
        runs=(AcRun("drive", {"v1": 1.0}, (AcSweep("dec", 10, 1.0, 1e9),)),),
        save=("v(out)",),
        excitable=("v1",),
    )
    result = simulator.run(job)
    assert result.convergence_aid is None  # a linear circuit: plain Newton converges at once
    run = result.run("drive")
    expected = 1.0 / (1.0 + 2j * np.pi * run.freq_hz * R * C)  # circuit theory: RC divider, closed form
    assert run.freq_hz.size == 91
    np.testing.assert_allclose(run.vectors["v(out)"], expected, rtol=1e-9, atol=0)


TWO_SOURCES = """two sources into one node
v1 in1 0 dc 1 ac 1
v2 in2 0 dc 2 ac 1
r1 in1 out 1k
r2 in2 out 3k
c1 out 0 10n
"""
G1, G2, C2 = 1 / 1e3, 1 / 3e3, 10e-9


@pytest.mark.ngspice
def test_two_runs_are_superposition_terms(simulator):
    """Run 1 excites v1 only and run 2 excites v2 only (the netlist's 'ac 1' on the other is zeroed):
    each equals its closed-form superposition term, and the operating point is the DC divider."""
    sweep = (AcSweep("dec", 5, 10.0, 1e7),)
    job = SimJob(
        netlist=TWO_SOURCES,
        runs=(AcRun("first", {"v1": 1.0}, sweep), AcRun("second", {"V2": 2.5}, sweep)),
        save=("v(out)", "i(v1)"),
        excitable=("v1", "v2"),
    )
    result = simulator.run(job)
    for name, a1, a2 in (("first", 1.0, 0.0), ("second", 0.0, 2.5)):
        run = result.run(name)
        y = G1 + G2 + 2j * np.pi * run.freq_hz * C2
        v_out = (a1 * G1 + a2 * G2) / y  # circuit theory: nodal analysis of one node, closed form
        i_v1 = -(a1 - v_out) * G1  # ngspice's branch current flows into the + terminal
        np.testing.assert_allclose(run.vectors["v(out)"], v_out, rtol=1e-9)
        np.testing.assert_allclose(run.vectors["i(v1)"], i_v1, rtol=1e-9, atol=1e-18)
    # circuit theory: DC divider (1 V * 3k + 2 V * 1k) / 4k = 1.25 V
    assert result.operating_point["out"] == pytest.approx(1.25, rel=1e-9)
    assert result.operating_point["in2"] == pytest.approx(2.0, rel=1e-12)


HIERARCHY = """hierarchy
.subckt divider top bot
r1 top n5 1k
r2 n5 bot 3k
.ends
v1 a 0 dc 4 ac 1
vprobe a b dc 0
xamp b 0 divider
"""


@pytest.mark.ngspice
def test_hierarchical_vectors_and_operating_point(simulator):
    """A node inside a subcircuit is saved as v(xamp.n5), a branch as i(vprobe), and the operating
    point names the inner node as ngspice prints it (xamp.n5)."""
    job = SimJob(
        netlist=HIERARCHY,
        runs=(AcRun("ac", {"v1": 2.0}, (AcSweep("lin", 3, 1e3, 3e3),)),),
        save=("v(xamp.n5)", "i(vprobe)"),
        excitable=("v1",),
    )
    result = simulator.run(job)
    run = result.run("ac")
    np.testing.assert_allclose(run.freq_hz, [1e3, 2e3, 3e3], rtol=1e-12)  # ngspice 'ac lin 3' visits start..stop
    np.testing.assert_allclose(run.vectors["v(xamp.n5)"], 2.0 * 3 / 4, rtol=1e-9)  # divider 3k/(1k+3k), closed form
    np.testing.assert_allclose(run.vectors["i(vprobe)"], 2.0 / 4e3, rtol=1e-9)  # Ohm's law through 4k
    assert result.operating_point["xamp.n5"] == pytest.approx(3.0, rel=1e-9)  # 4 V * 3/4, closed form
    assert set(result.operating_point) == {"a", "b", "xamp.n5"}


@pytest.mark.ngspice
def test_backends_give_the_same_vectors(shared_sim, batch_sim):
    """The shared-library and batch backends return the same vectors to 1e-9 on one job with two sweeps."""
    job = SimJob(
        netlist=TWO_SOURCES,
        runs=(
            AcRun("both", {"v1": 1.0, "v2": -0.5}, (AcSweep("dec", 7, 1.0, 1e5), AcSweep("lin", 11, 1e4, 2e4))),
            AcRun("one", {"v2": 1.0}, (AcSweep("dec", 3, 100.0, 1e8),)),
        ),
        save=("v(out)", "i(v1)", "v(in2)"),
        excitable=("v1", "v2"),
    )
    a, b = shared_sim.run(job), batch_sim.run(job)
    assert a.backend != b.backend
    for name in ("both", "one"):
        ra, rb = a.run(name), b.run(name)
        np.testing.assert_allclose(ra.freq_hz, rb.freq_hz, rtol=1e-12)
        assert np.all(np.diff(ra.freq_hz) > 0)
        for key in job.save:
            np.testing.assert_allclose(ra.vectors[key], rb.vectors[key], rtol=1e-9, atol=1e-20)
    assert a.operating_point.keys() == b.operating_point.keys()
    for node, volts in a.operating_point.items():
        assert b.operating_point[node] == pytest.approx(volts, rel=1e-12, abs=1e-15)
