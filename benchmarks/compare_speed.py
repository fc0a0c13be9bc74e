"""Time `netloop compare` at 8 locations against 8 separate `netloop check` runs of the same locations; prints the ratio.

    .venv/bin/python benchmarks/compare_speed.py [--repeat 3] [--netlist circuits/hier/top.cir]

Both ways run the whole command as a user would (a new process each, ngspice included), taking
turns so that machine load hits both alike; the best time of each is compared. Target: compare
costs at most 0.6x of the separate checks (issue 8).
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
LOCATIONS = ("out1", "xa1.o1", "xa1.d1", "xa1.tail", "out2", "fb2", "xa2.o1", "xa2.d1")  # both channels of the readout
TARGET = 0.6


def _netloop() -> list[str]:
    return [sys.executable, "-c", "from netloop.cli.main import entry; entry()"]


def _run(argv: list[str]) -> None:
    done = subprocess.run(argv, capture_output=True, text=True, cwd=ROOT)
    if done.returncode not in (0, 1):  # 1 is a loop that fails a requirement: still a full measurement
        raise SystemExit(f"{' '.join(argv)} failed ({done.returncode}):\n{done.stderr[-2000:]}")


def compare_once(netlist: str) -> float:
    start = time.perf_counter()
    _run([*_netloop(), "compare", netlist, *(a for at in LOCATIONS for a in ("--at", at))])
    return time.perf_counter() - start


def checks_once(netlist: str) -> float:
    start = time.perf_counter()
    for at in LOCATIONS:
        _run([*_netloop(), "check", netlist, "--at", at])
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--netlist", default=str(ROOT / "circuits" / "hier" / "top.cir"))
    parser.add_argument("--quick", action="store_true", help="a smoke run: once")
    args = parser.parse_args()
    if args.quick:
        args.repeat = 1
    together: list[float] = []
    apart: list[float] = []
    for _ in range(args.repeat):
        together.append(compare_once(args.netlist))
        apart.append(checks_once(args.netlist))
    best_c, best_s = min(together), min(apart)
    ratio = best_c / best_s
    print(f"netlist: {args.netlist}; {len(LOCATIONS)} locations: {', '.join(LOCATIONS)}")
    print(f"compare (one command, one deck):   best {best_c:.2f} s of {', '.join(f'{t:.2f}' for t in together)}")
    print(f"check x {len(LOCATIONS)} (separate commands):  best {best_s:.2f} s of {', '.join(f'{t:.2f}' for t in apart)}")
    print(f"ratio compare / separate checks: {ratio:.3f} (target <= {TARGET}) -> {'MET' if ratio <= TARGET else 'MISSED'}")


if __name__ == "__main__":
    main()
