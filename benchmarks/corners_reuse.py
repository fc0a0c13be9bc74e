"""An 18-corner PVT plan on a sky130 regulator with shared loads against one load per corner, side by side on one Dask cluster.

Run:  .venv/bin/python benchmarks/corners_reuse.py [--workers 2] [--repeat 1] [--quick]

The plan is 3 process sections (tt, ss, ff of the official sky130 corner sections; see
benchmarks/_sky130_regulator.py) x 3 temperatures x 2 supplies, measured at the regulator's gate
node. ``share_loads = true`` (netloop's default) lets the corners of one section run on one
loaded circuit, ngspice changing the temperature and the supply in place; ``share_loads = false``
makes every corner read the netlist and its model files again. Both plans run through run_plan on
the same local cluster (started as ``netloop corners --jobs N`` starts it, its workers warmed
before the clock starts and their loaded circuits dropped between runs, so no run inherits a load),
taking turns ``--repeat`` times; the fastest of each counts. Target: shared >= 3x one load per
corner. ``--quick``: the bundled MOSFET-only process file and 4 corners (a smoke run).
"""

from __future__ import annotations

import argparse
import contextlib
import os
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import _sky130_regulator as testbench  # noqa: E402

TARGET = 3.0
PLAN = """
netlist = "{netlist}"
at = "{at}"
share_loads = {share}

[axes]
lib = {sections}
temp = {temps}
supply.vsup = {supplies}
"""


def _warm() -> None:
    """Start the worker's ngspice and import what its first corner would otherwise import on the clock."""
    import netloop.report  # noqa: F401 - run_task's record writer
    from netloop.analysis.preload import load_scipy
    from netloop.jobs.corners.worker import worker_simulator

    worker_simulator()
    load_scipy()


def _drop_loaded() -> None:
    """Forget the circuit this worker's ngspice holds (a fresh start for the next run): a new ngspice worker process."""
    from netloop.jobs.corners.worker import close_simulator, worker_simulator

    close_simulator()
    worker_simulator()


def timed_run(plan_path: Path, address: str, out: Path) -> tuple[float, tuple[dict, ...]]:
    from netloop.jobs.corners import load_plan, run_plan

    start = time.perf_counter()
    run = run_plan(load_plan(plan_path), cluster=address, out=out, force=True)
    return time.perf_counter() - start, run.records


def _beyond_ngspice(wall_s: float, workers: int, records: tuple[dict, ...]) -> float:
    """Seconds per corner of the workers' time not spent waiting for ngspice (SimInfo.seconds)."""
    return (wall_s * workers - sum(r["sim_seconds"] for r in records)) / len(records)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--workers", type=int, default=2, help="Dask workers (default 2)")
    parser.add_argument("--repeat", type=int, default=1, help="runs of each plan, taking turns; the fastest counts (default 1)")
    parser.add_argument("--quick", action="store_true", help="a smoke run: the bundled MOSFET-only process file, 4 corners")
    args = parser.parse_args()
    from distributed import Client

    from netloop.jobs.corners.runner import local_cluster

    with tempfile.TemporaryDirectory(prefix="netloop-bench-") as tmp:
        work = Path(tmp)
        if args.quick:
            library, sections, temps, supplies = testbench.quick_library(), '["tt", "ss"]', "[27, 85]", "[1.8]"
        else:
            library = testbench.sections_library(work / "sky130_sections.lib")
            sections, temps, supplies = '["tt", "ss", "ff"]', "[-40, 27, 125]", "[1.7, 1.9]"
        netlist = work / "regulator.cir"
        netlist.write_text(testbench.regulator(library, quick=args.quick))
        plans = {}
        for share in (True, False):
            plans[share] = work / f"share-{share}.toml"
            plans[share].write_text(PLAN.format(netlist=netlist.as_posix(), at=testbench.BREAK, share=str(share).lower(),
                                                sections=sections, temps=temps, supplies=supplies))
        load_before = os.getloadavg()[0]
        runs: dict[bool, list] = {True: [], False: []}
        with contextlib.ExitStack() as stack:
            cluster = stack.enter_context(local_cluster(args.workers))
            client = stack.enter_context(Client(cluster))
            client.wait_for_workers(args.workers)
            client.run(_warm)
            for i in range(args.repeat):
                for share in ((True, False) if i % 2 == 0 else (False, True)):  # taking turns: a burst of other work hits both
                    client.run(_drop_loaded)
                    runs[share].append(timed_run(plans[share], cluster.scheduler_address, work / f"r{share}.jsonl"))
        best = {share: min(r, key=lambda x: x[0]) for share, r in runs.items()}
        (wall_s, rec_s), (wall_f, rec_f) = best[True], best[False]
        n = len(rec_s)
        loads_s, loads_f = sum(r["loads"] or 0 for r in rec_s), sum(r["loads"] or 0 for r in rec_f)
        ratio = wall_f / wall_s
        print(f"{n} corners (sections {sections} x temperatures {temps} x supplies {supplies}) of the sky130 regulator "
              f"({'bundled MOSFET-only process file' if args.quick else 'official sky130 corner sections'}), {args.workers} workers, "
              f"best of {args.repeat}; load average {load_before:.2f} before, {os.getloadavg()[0]:.2f} after")
        print(f"one load per corner (share_loads = false): {wall_f:7.2f} s, {loads_f} loads, {wall_f / n:.3f} s a corner")
        print(f"shared loads (share_loads = true)        : {wall_s:7.2f} s, {loads_s} loads, {wall_s / n:.3f} s a corner")
        print(f"time per corner beyond ngspice's own (workers' time not waiting for ngspice): shared {_beyond_ngspice(wall_s, args.workers, rec_s) * 1e3:.0f} ms, "
              f"one load per corner {_beyond_ngspice(wall_f, args.workers, rec_f) * 1e3:.0f} ms")
        identical = all(a["loop"]["margins"] == b["loop"]["margins"] for a, b in zip(rec_s, rec_f))
        print(f"margins of every corner identical in both runs: {identical}")
        target = "" if args.quick else f" ({'meets' if ratio >= TARGET else 'misses'} the {TARGET}x target)"
        print(f"speed-up shared / one load per corner: {ratio:.2f}x{target}")


if __name__ == "__main__":
    main()
