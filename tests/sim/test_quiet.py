"""Running jobs prints nothing and warns nothing: PySpice's and ngspice's chatter stays inside sim."""

from __future__ import annotations

import logging
import warnings

import pytest

from netloop.sim import AcRun, AcSweep, BatchSimulator, SharedLibrarySimulator, SimJob, default_simulator

# The netlist triggers ngspice's gmin-stepping notes and warnings on stderr, the chatter at issue.
JOB = SimJob(
    "chatty\nb1 m 0 i = v(m)*v(m)*v(m) - 1m\nv1 in 0 dc 0 ac 1\nr1 in n 1k\nc1 n 0 1u\n",
    runs=(AcRun("a", {"v1": 1.0}, (AcSweep("dec", 2, 1.0, 100.0),)),),
    save=("v(n)",),
    excitable=("v1",),
)


@pytest.mark.ngspice
@pytest.mark.parametrize("factory", [SharedLibrarySimulator, BatchSimulator, default_simulator])
def test_running_a_job_is_silent(factory, capfd, caplog):
    """A fresh simulator (worker start, PySpice import, library load) and a job write nothing to
    stdout/stderr, emit no warnings and log nothing at WARNING or above."""
    caplog.set_level(logging.DEBUG)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        simulator = factory()
        try:
            result = simulator.run(JOB)
            simulator.operating_point(JOB.netlist)
        finally:
            simulator.close()
    assert "gmin" in result.log  # the chatter happened, and went into the result's log only
    out, err = capfd.readouterr()
    assert out == "" and err == ""
    assert not [r for r in caplog.records if r.levelno >= logging.WARNING]
