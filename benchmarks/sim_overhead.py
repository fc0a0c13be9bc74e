"""Time netloop's ngspice backends against plain ``ngspice -b`` on the same deck; prints ratios.

    .venv/bin/python benchmarks/sim_overhead.py [--sections 2000] [--points 50] [--repeat 5]

The circuit is an RC ladder; the job has two runs (two excitations) of one decade sweep each and
saves two vectors. "plain" runs the very deck batch mode renders (runnable_deck) with ngspice -b.
"""

from __future__ import annotations

import argparse
import subprocess
import tempfile
import time
from pathlib import Path

from netloop.sim import AcRun, AcSweep, BatchSimulator, SharedLibrarySimulator, SimJob, find_ngspice_binary
from netloop.sim.keep import runnable_deck


def ladder_job(sections: int, points: int) -> SimJob:
    lines = ["rc ladder benchmark", "v1 n0 0 dc 1 ac 0", f"v2 n{sections} 0 dc 0 ac 0"]
    for i in range(sections - 1):
        lines.append(f"r{i} n{i} n{i + 1} 1k")
        lines.append(f"c{i} n{i + 1} 0 1p")
    lines.append(f"r{sections - 1} n{sections - 1} n{sections} 1k")
    sweep = (AcSweep("dec", points, 1e3, 1e9),)
    return SimJob(
        netlist="\n".join(lines),
        runs=(AcRun("left", {"v1": 1.0}, sweep), AcRun("right", {"v2": 1.0}, sweep)),
        save=(f"v(n{sections // 2})", "i(v1)"),
        excitable=("v1", "v2"),
    )


def best_interleaved(repeat: int, actions: dict) -> dict[str, float]:
    """Best time of each action, the actions taking turns so that machine load hits all alike."""
    times: dict[str, list[float]] = {name: [] for name in actions}
    for _ in range(repeat):
        for name, action in actions.items():
            start = time.perf_counter()
            action()
            times[name].append(time.perf_counter() - start)
    return {name: min(values) for name, values in times.items()}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sections", type=int, default=2000)
    parser.add_argument("--points", type=int, default=50, help="points per decade")
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--quick", action="store_true", help="a smoke run: 200 sections, 10 points per decade, once")
    args = parser.parse_args()
    if args.quick:
        args.sections, args.points, args.repeat = 200, 10, 1
    job = ladder_job(args.sections, args.points)
    binary = find_ngspice_binary()
    batch = BatchSimulator()
    with tempfile.TemporaryDirectory() as work, SharedLibrarySimulator() as shared:
        deck = Path(work) / "deck.cir"
        deck.write_text(runnable_deck(job, None))
        start = time.perf_counter()
        shared.start()
        t_start = time.perf_counter() - start
        best = best_interleaved(
            args.repeat,
            {
                "plain": lambda: subprocess.run([binary, "-b", str(deck)], cwd=work, capture_output=True, check=False),
                "batch": lambda: batch.run(job),
                "shared": lambda: shared.run(job),
            },
        )
    t_plain, t_batch, t_shared = best["plain"], best["batch"], best["shared"]
    print(f"RC ladder, {args.sections} sections, 2 runs x {6 * args.points + 1} points, best of {args.repeat}")
    print(f"plain ngspice -b        {t_plain * 1e3:9.1f} ms   1.00")
    print(f"netloop batch backend   {t_batch * 1e3:9.1f} ms   {t_batch / t_plain:.2f}x plain")
    print(f"netloop shared backend  {t_shared * 1e3:9.1f} ms   {t_shared / t_plain:.2f}x plain (warm worker)")
    print(f"  worker start (once)   {t_start * 1e3:9.1f} ms")


if __name__ == "__main__":
    main()
