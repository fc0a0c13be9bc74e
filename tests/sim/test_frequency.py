"""Sweep grids as ngspice visits them, and merging several sweeps into one ascending grid."""

from __future__ import annotations

import numpy as np
import pytest

from netloop.sim import AcRun, AcSweep, SimJob, sweep_frequencies
from netloop.sim.frequency import merge_sweeps, sweep_problem

SWEEPS = (
    AcSweep("dec", 10, 1.0, 1e6),
    AcSweep("dec", 7, 3.3, 4.7e5),
    AcSweep("dec", 10, 1.0, 10**0.999),
    AcSweep("dec", 10, 1.0, 10**1.0004),
    AcSweep("lin", 11, 1e3, 2e3),
    AcSweep("lin", 1, 5e3, 5e3),
    AcSweep("lin", 4, 1.0, 1.5),
)


@pytest.mark.ngspice
@pytest.mark.parametrize("sweep", SWEEPS, ids=lambda s: f"{s.kind}{s.points}-{s.fstart_hz:g}-{s.fstop_hz:g}")
def test_sweep_points_match_ngspice(shared_sim, sweep):
    """sweep_frequencies gives the frequencies ngspice's own 'ac' analysis visits (same count, 1e-12)."""
    job = SimJob("rc\nv1 in 0 ac 1\nr1 in 0 1k\n", runs=(AcRun("a", {"v1": 1.0}, (sweep,)),), save=("v(in)",))
    simulated = shared_sim.run(job).run("a").freq_hz  # ngspice's frequency vector
    np.testing.assert_allclose(sweep_frequencies(sweep), simulated, rtol=1e-12)


def test_merge_orders_and_drops_duplicates():
    """Merged sweeps are ascending, keep each vector aligned with its frequency, and drop repeats."""
    a = (np.array([1.0, 10.0, 100.0]), {"x": np.array([1, 10, 100], dtype=complex)})
    b = (np.array([10.0 * (1 + 1e-13), 20.0, 5.0]), {"x": np.array([-1, 20, 5], dtype=complex)})
    freq, vectors = merge_sweeps([a, b])
    np.testing.assert_array_equal(freq, [1.0, 5.0, 10.0, 20.0, 100.0])
    np.testing.assert_array_equal(vectors["x"], [1, 5, 10, 20, 100])  # the first of the 10 Hz pair is kept


def test_no_sweep_merges_to_no_point():
    """A run with no sweep gives no frequency and no row of data (merge_rows of nothing)."""
    from netloop.sim.frequency import merge_rows  # noqa: PLC0415

    freq, rows = merge_rows([])
    assert freq.shape == (0,) and rows.shape == (0, 0) and rows.dtype == np.complex128


def test_bad_sweeps_are_rejected():
    """Sweeps ngspice 39 cannot run as meant (no points, zero start, reversed limits, a 'dec' span
    under one step, 'lin 2') are refused with a message."""
    limits = "need points >= 1 and 0 < fstart_hz <= fstop_hz"
    narrow = "a 'dec' sweep needs fstop_hz/fstart_hz >= 10**(1/points) (ngspice 39 hangs or returns nothing otherwise)"
    bad = {
        AcSweep("dec", 0, 1.0, 10.0): limits,
        AcSweep("dec", 5, 0.0, 10.0): limits,
        AcSweep("lin", 5, 10.0, 1.0): limits,
        AcSweep("dec", 10, 10.0, 10.0): narrow,
        AcSweep("dec", 10, 1.0, 1.2): narrow,
        AcSweep("lin", 2, 1.0, 2.0): "ngspice 39 runs 'ac lin 2' as a single point; use 1 or at least 3 points",
        AcSweep("oct", 5, 1.0, 10.0): "sweep kind must be 'dec' or 'lin', not 'oct'",
    }
    for sweep, why in bad.items():
        with pytest.raises(ValueError, match="bad ac sweep") as info:
            sweep_frequencies(sweep)
        assert str(info.value).endswith(why), (sweep, str(info.value))
        assert sweep_problem(sweep) == why


@pytest.mark.ngspice
def test_backends_refuse_a_sweep_ngspice_would_hang_on(simulator):
    """A 'dec' sweep narrower than one step is refused up front (ngspice 39 -b loops forever on
    'ac dec 10 1 1.2', printing 'Reference value : inf', observed on this machine)."""
    from netloop.errors import SimulationError  # noqa: PLC0415

    job = SimJob("rc\nv1 in 0 ac 1\nr1 in 0 1k\n", runs=(AcRun("a", {"v1": 1.0}, (AcSweep("dec", 10, 1.0, 1.2),)),), save=("v(in)",), timeout_s=5)
    with pytest.raises(SimulationError, match="needs fstop_hz/fstart_hz >= 10"):
        simulator.run(job)
