"""Probe test helpers: one ngspice session per module, and the two probe runs on a probed netlist."""

from __future__ import annotations

import numpy as np
import pytest

from netloop.netlist import write_netlist


@pytest.fixture(scope="module")
def simulator():
    from netloop.sim import default_simulator  # noqa: PLC0415

    sim = default_simulator()
    yield sim
    close = getattr(sim, "close", None)
    if close is not None:
        close()


def probe_runs(simulator, probed, fstart_hz=1.0, fstop_hz=1e10, points=10):
    """Both probe runs on one operating point: frequencies, ProbeQuantities and the operating point."""
    from netloop.sim import AcRun, AcSweep, SimJob  # noqa: PLC0415

    sweeps = (AcSweep("dec", points, fstart_hz, fstop_hz),)
    job = SimJob(
        netlist=write_netlist(probed.netlist),
        runs=(AcRun("series", probed.series_run_ac, sweeps), AcRun("shunt", probed.shunt_run_ac, sweeps)),
        save=probed.vectors.save,
        excitable=(probed.series_source, probed.shunt_source),
    )
    result = simulator.run(job)
    series, shunt = result.run("series"), result.run("shunt")
    assert np.array_equal(series.freq_hz, shunt.freq_hz)
    q = probed.vectors.quantities(series.vectors, shunt.vectors)
    return series.freq_hz, q, result.operating_point
