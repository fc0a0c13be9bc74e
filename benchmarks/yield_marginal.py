"""What one more sample costs in a statistical run: the same plan at two sizes on one warmed worker, the difference.

Run:  .venv/bin/python benchmarks/yield_marginal.py [--sizes 40,200] [--repeat 3] [--quick]

benchmarks/yield_speed.py divides a whole run's wall time by its samples, so what a run does once (the plan
check, the client, the statistics at the end) is spread over them. This script runs the same plan (the
sky130 Miller buffer at tt_mm, mismatch on, as yield_speed.py) at a small and a large size on one Dask
worker, started and warmed as yield_speed.py does it, the sizes taking turns ``--repeat`` times, the
fastest run of each size counting. The samples beyond the small run's (the first samples of both are the
same seeds) cost the difference of the wall times; ngspice's own share of them is the difference of the
records' SimInfo.ngspice_seconds. Their ratio, less one, is netloop's cost per sample with the run's fixed
costs taken out; the fixed costs are the wall time the difference does not explain.
``--quick``: the invented Miller buffer (no mismatch), 2 and 4 samples, once (a smoke run of the path).
"""

from __future__ import annotations

import argparse
import contextlib
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import yield_speed  # noqa: E402 - the plan, the warm-up and the timed run are that script's

ROOT = yield_speed.ROOT


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="40,200", help="the two plan sizes, small first (default 40,200)")
    parser.add_argument("--repeat", type=int, default=3, help="runs of each size, taking turns; the fastest counts (default 3)")
    parser.add_argument("--quick", action="store_true", help="a smoke run: the invented Miller buffer, 2 and 4 samples, once")
    args = parser.parse_args()
    small, large = (2, 4) if args.quick else (int(x) for x in args.sizes.split(","))
    repeat = 1 if args.quick else args.repeat
    if args.quick:
        netlist, axes = ROOT / "circuits" / "miller_buffer.cir", ""
    else:
        netlist, axes = ROOT / "circuits" / "sky130" / "miller_buffer.cir", '[axes]\nlib = ["tt_mm"]\n'
    from distributed import Client

    from netloop.jobs.corners.runner import local_cluster

    best: dict[int, tuple[float, float]] = {}
    with tempfile.TemporaryDirectory(prefix="netloop-bench-") as tmp, contextlib.ExitStack() as stack:
        work = Path(tmp)
        cluster = stack.enter_context(local_cluster(1))
        client = stack.enter_context(Client(cluster))
        client.wait_for_workers(1)
        client.run(yield_speed._warm)
        plans = {}
        for n in (small, large):
            plans[n] = work / f"plan{n}.toml"
            plans[n].write_text(yield_speed.PLAN.format(netlist=netlist.as_posix(), axes=axes, count=n))
        for i in range(repeat):
            for n in ((small, large) if i % 2 == 0 else (large, small)):
                wall, records, _, _ = yield_speed.timed_run(plans[n], client, cluster.scheduler_address, work / "out.jsonl")
                ngspice = sum(r["loop"]["simulation"]["ngspice_seconds"] for r in records)
                if n not in best or wall < best[n][0]:
                    best[n] = (wall, ngspice)
    for n in (small, large):
        wall, ngspice = best[n]
        print(f"{n} samples: wall {wall:.3f} s, ngspice's own {ngspice:.3f} s, overhead {(wall - ngspice) / ngspice * 100:.1f} %")
    (wall_s, ng_s), (wall_l, ng_l) = best[small], best[large]
    extra = large - small
    per_wall, per_ngspice = (wall_l - wall_s) / extra, (ng_l - ng_s) / extra
    print(f"each sample beyond the first {small}: {per_wall * 1e3:.1f} ms against ngspice's own {per_ngspice * 1e3:.1f} ms, ratio "
          f"{per_wall / per_ngspice:.3f} ({(per_wall / per_ngspice - 1) * 100:.1f} % beyond ngspice's own)")
    print(f"the run's fixed costs (wall time the samples do not explain): {(wall_s - small * per_wall) * 1e3:.0f} ms")


if __name__ == "__main__":
    main()
