"""Knobs shared out to Dask worker processes, each with its own ngspice holding the loop's circuit, when one process would take long."""

from __future__ import annotations

from collections.abc import Sequence

from netloop.jobs.sensitivity.knobs import Knob
from netloop.jobs.sensitivity.records import Sensitivity
from netloop.jobs.sensitivity.remeasure import Remeasure

__all__ = ["SPREAD_MIN_SECONDS", "spread_slopes"]

SPREAD_MIN_SECONDS = 20.0
"""When the knobs left would take longer than this in the measurement's own ngspice (judged from the
first knob), they go to Dask workers: starting a local cluster and an ngspice in each worker, each
loading the circuit, costs a few seconds (netloop.jobs.corners.runner.local_cluster), which only pays
on long sets. ``workers=`` (``--jobs``) asks for workers whatever the estimate."""


def _task(knobs: tuple[Knob, ...], remeasure: Remeasure, step: float) -> tuple[Sensitivity, ...]:
    """What a worker runs: these knobs' slopes on the worker's own ngspice (started once per worker and kept)."""
    from netloop.jobs.corners.worker import worker_simulator  # noqa: PLC0415 - the corner workers' one ngspice per process
    from netloop.jobs.sensitivity.slopes import slopes_of  # noqa: PLC0415

    return slopes_of(remeasure, worker_simulator(), knobs, step)


def spread_slopes(remeasure: Remeasure, knobs: Sequence[Knob], step: float, workers: int | None) -> tuple[tuple[Sensitivity, ...], int]:
    """Every knob's Sensitivity, in the order given, computed on ``workers`` Dask worker processes
    (default: the usable CPUs); returns them and how many workers there were."""
    from netloop.jobs.corners.runner import dask_client  # noqa: PLC0415
    from netloop.sim.split import usable_cpus  # noqa: PLC0415

    count = max(1, min(workers or usable_cpus(), len(knobs)))
    chunks = [tuple(knobs[i::count * 2]) for i in range(count * 2)]
    chunks = [c for c in chunks if c]
    with dask_client(jobs=count) as client:
        futures = client.map(_task, chunks, remeasure=remeasure, step=step, pure=False)
        results = client.gather(futures)
    by_knob = {s.knob: s for chunk in results for s in chunk}
    return tuple(by_knob[k] for k in knobs), count
