"""Saving only the asked-for vectors against saving everything: ngspice's time and peak memory.

    .venv/bin/python benchmarks/sim_save.py [--sections 20000] [--points 20]

Runs the same RC-ladder job twice with ``ngspice -b``: once as netloop renders it (a ``save`` of
the job's two vectors before the sweeps), once with the ``save`` lines removed, so that ngspice
keeps every node and branch of every sweep. Prints wall time and peak resident memory, and ratios.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from sim_overhead import ladder_job  # noqa: E402

from netloop.sim import find_ngspice_binary  # noqa: E402
from netloop.sim.keep import runnable_deck  # noqa: E402


def run(binary: str, deck: Path) -> tuple[float, float]:
    """Wall seconds and peak RSS (MB) of one ``ngspice -b deck``."""
    start = time.perf_counter()
    process = subprocess.Popen([binary, "-b", deck.name], cwd=deck.parent, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    _, _, usage = os.wait4(process.pid, 0)
    process.returncode = 0
    return time.perf_counter() - start, usage.ru_maxrss / 1024.0


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sections", type=int, default=20000)
    parser.add_argument("--points", type=int, default=20, help="points per decade")
    parser.add_argument("--quick", action="store_true", help="a smoke run: 500 sections, 5 points per decade")
    args = parser.parse_args()
    if args.quick:
        args.sections, args.points = 500, 5
    job = ladder_job(args.sections, args.points)
    binary = find_ngspice_binary()
    with tempfile.TemporaryDirectory() as work:
        saved = Path(work) / "saved.cir"
        everything = Path(work) / "everything.cir"
        text = runnable_deck(job, None)
        saved.write_text(text)
        everything.write_text("\n".join(line for line in text.splitlines() if not line.startswith("save ")) + "\n")
        t_saved, m_saved = run(binary, saved)
        t_all, m_all = run(binary, everything)
    print(f"RC ladder, {args.sections} sections ({2 * args.sections} elements), 2 runs x {6 * args.points + 1} points")
    print(f"save job vectors only  {t_saved:7.2f} s  {m_saved:8.1f} MB peak")
    print(f"save everything        {t_all:7.2f} s  {m_all:8.1f} MB peak")
    print(f"ratio everything/only  {t_all / t_saved:7.2f}x time  {m_all / m_saved:6.2f}x memory")


if __name__ == "__main__":
    main()
