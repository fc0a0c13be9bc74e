"""Time analyse() against python-control's stability_margins on the same frequency data, and the pole fit's share.

    .venv/bin/python benchmarks/analysis_speed.py [--per-decade 100] [--repeat 20]

One run measures, with time.process_time (CPU seconds, so other load on the machine bends the
ratio little), on a four-pole loop sampled from 1e-4 to 1e6 Hz:
  * netloop analyse() without the pole fit vs python-control 0.10 stability_margins on an FRD of
    the same samples (python-control finds fewer things: no Nyquist count, no lower/upper split);
  * analyse() with the AAA pole fit vs without it.
Printed as ratios. Target: analyse() with everything under 0.5 s for 1000 samples.
"""

from __future__ import annotations

import argparse
import time

import control
import numpy as np

from netloop.analysis import analyse


def cpu(fn, repeat: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.process_time()
        fn()
        best = min(best, time.process_time() - t0)
    return best


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--per-decade", type=int, default=100)
    parser.add_argument("--repeat", type=int, default=20)
    parser.add_argument("--quick", action="store_true", help="a smoke run: 10 points per decade, 2 repeats")
    args = parser.parse_args()
    if args.quick:
        args.per_decade, args.repeat = 10, 2
    loop = control.tf([25], [1, 10, 10, 10]) * control.tf([1], [1e-3, 1])
    f = np.logspace(-4, 6, 10 * args.per_decade + 1)
    t = loop(2j * np.pi * f)
    frd = control.frd(t, 2 * np.pi * f)
    ours = cpu(lambda: analyse(f, t, fit_poles=False), args.repeat)
    full = cpu(lambda: analyse(f, t), args.repeat)
    theirs = cpu(lambda: control.stability_margins(frd, returnall=True), args.repeat)
    print(f"samples: {f.size}")
    print(f"analyse() without pole fit: {ours * 1e3:.2f} ms CPU; python-control stability_margins(FRD): {theirs * 1e3:.2f} ms CPU")
    print(f"ratio analyse()/python-control: {ours / theirs:.2f}")
    print(f"analyse() with pole fit: {full * 1e3:.2f} ms CPU; ratio with/without pole fit: {full / ours:.2f}")
    print(f"target (< 0.5 s with everything): {'met' if full < 0.5 else 'MISSED'}")


if __name__ == "__main__":
    main()
