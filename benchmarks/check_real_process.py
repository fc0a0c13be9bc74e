"""Time ``netloop check`` on a sky130 regulator (the official process sections) against the hand deck a designer would run.

    .venv/bin/python benchmarks/check_real_process.py [--repeat 3] [--quick]

The testbench (benchmarks/_sky130_regulator.py) reads its models from the official sky130 corner
section, about 5 s of ngspice's time before any analysis, as on a real design. The hand deck is
what an engineer does by hand for the same loop: the probe sources written into the netlist, one
``ac dec 100 0.01 1e10`` sweep per excitation (two AC runs, two operating points), the vectors
written to raw files. ``netloop check regulator.cir --at gate`` is the whole command (start-up,
parse, probe, first sweep, any widening, refinement of the phase margin to 1e-4 deg, analysis,
report). Both run as subprocesses, taking turns, ``--repeat`` times; the fastest of each counts.
Target: netloop <= 1.1x the hand deck. ``--quick``: the bundled MOSFET-only process file and
ideal resistors (a smoke run; netloop's start-up dominates there, so the target does not apply).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import time
import shutil
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import _sky130_regulator as testbench  # noqa: E402


TARGET = 1.1


# netloop runs as an installed package does, its modules' bytecode cached (PYTHONDONTWRITEBYTECODE would have
# every run compile netloop from source: about 0.5 s of CPU); an untimed first run writes the cache.
ENV = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}


def timed(command: list[str], cwd: Path) -> tuple[float, float, subprocess.CompletedProcess]:
    """(wall seconds, CPU seconds of the command and its children, the finished process)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    done = subprocess.run(command, cwd=cwd, capture_output=True, text=True, check=False, env=ENV)
    wall = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime), done


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3, help="runs of each side, taking turns; the fastest counts (default 3)")
    parser.add_argument("--quick", action="store_true", help="a smoke run: the bundled MOSFET-only process file, once")
    args = parser.parse_args()
    repeat = 1 if args.quick else args.repeat
    netloop = str(Path(sys.executable).with_name("netloop"))
    ngspice = shutil.which("ngspice") or sys.exit("check_real_process: ngspice is not on PATH")
    with tempfile.TemporaryDirectory(prefix="netloop-bench-") as tmp:
        work = Path(tmp)
        library = testbench.quick_library() if args.quick else testbench.sections_library(work / "sky130_sections.lib")
        (work / "regulator.cir").write_text(testbench.regulator(library, quick=args.quick))
        (work / "hand.cir").write_text(testbench.hand_deck(testbench.regulator(library, quick=args.quick, probed=True)))
        load_before = os.getloadavg()[0]
        netloop_s, hand_s, netloop_cpu, hand_cpu, doc = [], [], [], [], {}
        timed([netloop, "check", "regulator.cir", "--at", testbench.BREAK], work)  # untimed: bytecode cache, file cache
        for _ in range(repeat):
            seconds, cpu, done = timed([netloop, "check", "regulator.cir", "--at", testbench.BREAK, "--json"], work)
            if done.returncode not in (0, 1, 3):
                sys.exit(f"check_real_process: netloop check failed ({done.returncode}): {done.stderr.strip()[-2000:]}")
            netloop_s.append(seconds)
            netloop_cpu.append(cpu)
            doc = json.loads(done.stdout)
            seconds, cpu, done = timed([ngspice, "-b", "hand.cir"], work)
            if not (work / "run1.raw").is_file():
                sys.exit(f"check_real_process: the hand deck failed: {done.stdout[-2000:]}")
            (work / "run1.raw").unlink()
            hand_s.append(seconds)
            hand_cpu.append(cpu)
    t_netloop, t_hand = min(netloop_s), min(hand_s)
    ratio = t_netloop / t_hand
    sim = doc.get("simulation", {})
    print(f"sky130 regulator ({'bundled MOSFET-only process file' if args.quick else 'official sky130 tt section'}), "
          f"break at {testbench.BREAK}; best of {repeat}; load average {load_before:.2f} before, {os.getloadavg()[0]:.2f} after")
    print(f"ngspice -b hand deck (2 x ac dec 100)   {t_hand:7.2f} s   1.00   (runs: {', '.join(f'{s:.2f}' for s in hand_s)})")
    print(f"netloop check                           {t_netloop:7.2f} s   {ratio:.3f}x   (runs: {', '.join(f'{s:.2f}' for s in netloop_s)})")
    print(f"CPU time (user + system, all processes): hand deck {min(hand_cpu):.2f} s, netloop {min(netloop_cpu):.2f} s, "
          f"{min(netloop_cpu) / min(hand_cpu):.3f}x (steadier than wall time on a busy machine)")
    print(f"netloop: {sim.get('points')} points, {sim.get('refinement_rounds')} refinement round(s), "
          f"{sim.get('seconds', 0):.2f} s waiting for ngspice; phase margin {doc.get('margins', {}).get('phase_margin_deg')}")
    if args.quick:
        print(f"ratio netloop/hand deck {ratio:.3f} (quick smoke run: no model files to read, so netloop's start-up dominates)")
    else:
        print(f"ratio netloop/hand deck {ratio:.3f} ({'meets' if ratio <= TARGET else 'misses'} the {TARGET}x target)")


if __name__ == "__main__":
    main()
