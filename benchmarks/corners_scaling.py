"""Corner throughput on Dask: 16 corners on 2 workers against 1 worker, and the cost per corner beyond ngspice's own time.

Run:  .venv/bin/python benchmarks/corners_scaling.py [--circuit sky130|invented] [--ppd N] [--repeat R] [--quick]

The default circuit is the Miller buffer on SkyWater's sky130 models, a real process's corners (about
0.3 s each, mostly ngspice). ``--circuit invented`` runs the same buffer on the invented level-1
models, 20-30 ms a corner, where Dask's own cost per task (a few ms) and the coordinating process
sharing the two CPUs weigh on the ratio; ``--quick`` uses it, once per worker count, as a smoke run.

Both clusters (1 worker, 2 workers) are started as `netloop corners --workers N` starts them
(netloop.jobs.corners.runner.local_cluster) and their workers warmed (ngspice started, scipy and the
report stage imported) before the clock starts, so the ratio compares running corners, not starting
processes; runs alternate between the two and the fastest of each counts, so bursts of other work on
a shared machine weigh on both alike. Both runs go through run_plan (journal, Dask submission, result
collection), the same path as `netloop corners --cluster ADDRESS`.
"""

from __future__ import annotations

import argparse
import contextlib
import os
import statistics
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
PLAN = """
netlist = "{netlist}"
at = "out"
require = ["pm >= 45"]

[sweep]
points_per_decade = {ppd}

[axes]
lib = ["tt", "ss"]
temp = [-40, 0, 27, 125]
supply.vdd = {supplies}
"""
# invented level-1 models: ngspice is a small part of a corner; sky130: ngspice (model parsing) dominates
CIRCUITS = {
    "invented": ("circuits/miller_buffer.cir", "[3.0, 3.6]"),
    "sky130": ("circuits/sky130/miller_buffer.cir", "[1.7, 1.9]"),
}


def _warm() -> None:
    """Start the worker's ngspice and load what its first corner would otherwise load on the clock
    (the analysis's scipy modules, the report stage): the same once-per-worker start-up on both counts."""
    import netloop.report  # noqa: F401 - run_task's record writer
    from netloop.analysis.preload import load_scipy
    from netloop.jobs.corners.worker import worker_simulator

    worker_simulator()
    load_scipy()


def timed_run(plan_path: Path, address: str, out: Path) -> tuple[float, tuple[dict, ...]]:
    """Wall time of run_plan on the scheduler at ``address`` (journal, submission, collection included)."""
    from netloop.jobs.corners import load_plan, run_plan

    start = time.perf_counter()
    run = run_plan(load_plan(plan_path), cluster=address, out=out, force=True)
    return time.perf_counter() - start, run.records


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--ppd", type=int, default=10, help="points per decade of the first sweep (default 10, netloop's default)")
    parser.add_argument("--circuit", choices=tuple(CIRCUITS),
                        help="the Miller buffer on sky130 (default; about 0.3 s a corner) or on the invented models (about 25 ms a corner; "
                             "the default with --quick)")
    parser.add_argument("--repeat", type=int, default=5, help="runs per worker count; the fastest counts (default 5)")
    parser.add_argument("--quick", action="store_true", help="a smoke run: once per worker count")
    args = parser.parse_args()
    if args.quick:
        args.repeat = 1
    args.circuit = args.circuit or ("invented" if args.quick else "sky130")
    from distributed import Client

    from netloop.jobs.corners.runner import local_cluster

    with tempfile.TemporaryDirectory() as tmp:
        plan = Path(tmp) / "bench.toml"
        netlist, supplies = CIRCUITS[args.circuit]
        plan.write_text(PLAN.format(netlist=ROOT / netlist, ppd=args.ppd, supplies=supplies))
        load_before = os.getloadavg()[0]
        runs: dict[int, list] = {1: [], 2: []}
        with contextlib.ExitStack() as stack:
            addresses = {}
            for workers in (1, 2):
                cluster = stack.enter_context(local_cluster(workers))  # as `netloop corners --workers N` starts it
                client = stack.enter_context(Client(cluster))
                client.wait_for_workers(workers)
                client.run(_warm)  # each worker's ngspice started before the clock starts
                addresses[workers] = cluster.scheduler_address
            for _ in range(args.repeat):  # alternate, so a burst of other work on the machine hits both counts alike
                for workers in (1, 2):
                    runs[workers].append(timed_run(plan, addresses[workers], Path(tmp) / f"r{workers}.jsonl"))
        results = {w: min(r, key=lambda x: x[0]) for w, r in runs.items()}
        wall1, rec1 = results[1]
        wall2, rec2 = results[2]
        n = len(rec1)
        sim = statistics.fmean(r["sim_seconds"] for r in rec1)
        task = statistics.fmean(r["seconds"] for r in rec1)
        print(f"{n} corners of {netlist}, points per decade {args.ppd}, best of {args.repeat}; "
              f"{os.cpu_count()} CPUs, load average {load_before:.2f} before and {os.getloadavg()[0]:.2f} after (other work on the machine lowers the ratio)")
        print(f"1 worker : {wall1:.3f} s  ({wall1 / n * 1e3:.1f} ms per corner)")
        print(f"2 workers: {wall2:.3f} s  ({wall2 / n * 1e3:.1f} ms per corner)")
        print(f"speed-up 2 workers / 1 worker: {wall1 / wall2:.2f}x (target >= 1.8x)")
        print(f"per corner on 1 worker: ngspice {sim * 1e3:.1f} ms (SimInfo.seconds), "
              f"in-worker total {task * 1e3:.1f} ms, wall {wall1 / n * 1e3:.1f} ms")
        spread = {}
        for r in rec2:
            spread[r["worker"]] = spread.get(r["worker"], 0) + 1
        task2 = statistics.fmean(r["seconds"] for r in rec2)
        print(f"in-worker time per corner: {task * 1e3:.1f} ms on 1 worker, {task2 * 1e3:.1f} ms on 2 workers "
              f"(a rise means the workers compete for CPU; on an idle machine they stay equal)")
        print(f"corners per worker on 2 workers: {sorted(spread.values(), reverse=True)}")
        print(f"time per corner beyond ngspice's own: {(wall1 / n - sim) * 1e3:.1f} ms "
              f"(netlist + probe + analysis in the worker {(task - sim) * 1e3:.1f} ms, Dask and journal {(wall1 / n - task) * 1e3:.1f} ms)")


if __name__ == "__main__":
    main()
