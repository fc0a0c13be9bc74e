"""The public fake simulator that stages above sim use instead of ngspice."""

from __future__ import annotations

import numpy as np
import pytest

from netloop.errors import SimulationError
from netloop.sim import AcRun, AcSweep, AnalyticSimulator, SimJob, Simulator, sweep_frequencies

R, C = 1e3, 1e-9
TWO_SOURCES = """two sources
v1 in1 0 dc 1 ac 1
v2 in2 0 dc 2 ac 1
r1 in1 out 1k
r2 in2 out 3k
c1 out 0 10n
"""


def _out(freq, ac):
    y = 1e-3 + 1 / 3e3 + 2j * np.pi * freq * 10e-9
    return (ac["v1"] * 1e-3 + ac["v2"] / 3e3) / y  # circuit theory: nodal analysis of one node


def test_fake_follows_the_protocol_and_the_runs_excitation():
    """AnalyticSimulator is a Simulator; each run sees its own AC values with unnamed sources at 0."""
    fake = AnalyticSimulator({"V(out)": _out}, operating_point={"OUT": 1.25})
    assert isinstance(fake, Simulator)
    sweep = (AcSweep("dec", 5, 10.0, 1e7),)
    job = SimJob(TWO_SOURCES, runs=(AcRun("one", {"v1": 1.0}, sweep), AcRun("two", {"V2": 2.5}, sweep)), save=("v(out)",), excitable=("v1", "v2"))
    result = fake.run(job)
    f = result.run("one").freq_hz
    np.testing.assert_array_equal(f, sweep_frequencies(sweep[0]))
    np.testing.assert_allclose(result.run("one").vectors["v(out)"], 1e-3 / (1e-3 + 1 / 3e3 + 2j * np.pi * f * 10e-9))
    np.testing.assert_allclose(result.run("two").vectors["v(out)"], 2.5 / 3e3 / (1e-3 + 1 / 3e3 + 2j * np.pi * f * 10e-9))
    assert result.operating_point == {"out": 1.25} and fake.operating_point("x") == {"out": 1.25}
    assert fake.jobs == [job]


@pytest.mark.ngspice
def test_fake_matches_ngspice_on_the_same_job(shared_sim):
    """With the circuit's closed form as response, the fake returns what ngspice returns (1e-9)."""
    sweeps = (AcSweep("dec", 7, 3.3, 4.7e5), AcSweep("lin", 11, 1e3, 2e3))
    job = SimJob(TWO_SOURCES, runs=(AcRun("mix", {"v1": 0.5, "v2": -1.0}, sweeps),), save=("v(out)",), excitable=("v1", "v2"))
    real = shared_sim.run(job).run("mix")
    fake = AnalyticSimulator({"v(out)": _out}).run(job).run("mix")
    np.testing.assert_allclose(fake.freq_hz, real.freq_hz, rtol=1e-12)
    np.testing.assert_allclose(fake.vectors["v(out)"], real.vectors["v(out)"], rtol=1e-9)


def test_fake_without_a_response_says_which():
    """Asking the fake for a vector it has no function for raises SimulationError naming it."""
    job = SimJob("x\n", runs=(AcRun("a", {}, (AcSweep("lin", 3, 1.0, 3.0),)),), save=("v(nope)",), label="tt")
    with pytest.raises(SimulationError, match=r"\[tt\].*'v\(nope\)'"):
        AnalyticSimulator({}).run(job)
