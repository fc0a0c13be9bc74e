"""SimResult.ngspice_seconds: the time ngspice itself worked on a job, against the caller's own clock."""

from __future__ import annotations

import time

import pytest

from netloop.sim import AcRun, AcSweep, SimJob

LADDER = "rc ladder\nv1 n0 0 dc 1 ac 1\n" + "".join(f"r{i} n{i} n{i + 1} 1k\nc{i} n{i + 1} 0 1n\n" for i in range(60))


def _job(points: int) -> SimJob:
    return SimJob(netlist=LADDER, runs=(AcRun("drive", {"v1": 1.0}, (AcSweep("lin", points, 1.0, 1e6),)),), save=("v(n60)",),
                  excitable=("v1",), circuit_id="")


@pytest.mark.ngspice
def test_ngspice_time_is_part_of_the_wait_and_most_of_a_long_job(simulator):
    """ngspice's own time is positive and never more than the caller waited (time.perf_counter around run); on a job
    where ngspice's sweep dominates (20,000 points on a 60-section ladder), it is most of that wait, while on a job of
    three points the same fixed cost of processes, decks and data is a larger share (the two differ by the sweep)."""
    simulator.run(_job(3))  # a started worker, so its start-up is not in either wait
    shares = {}
    for points in (3, 20000):
        start = time.perf_counter()
        result = simulator.run(_job(points))
        waited = time.perf_counter() - start
        assert 0.0 < result.ngspice_seconds <= waited
        shares[points] = result.ngspice_seconds / waited
    assert shares[20000] > 0.7
    assert shares[20000] > shares[3]
