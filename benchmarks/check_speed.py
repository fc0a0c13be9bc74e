"""Time ``netloop check`` on a large netlist against ``ngspice -b`` on a hand-written deck doing the same AC work.

    .venv/bin/python benchmarks/check_speed.py [--elements 100000] [--circuit behavioural|miller] [--repeat 1] [--quick]

The netlist is a feedback loop whose feedback path runs through an RC parasitic network of
``--elements`` resistors and capacitors (a ladder from the output to the amplifier's input), so the
big network is inside the loop and matters: "behavioural" is a two-pole loop of controlled sources,
"miller" the Miller buffer of circuits/miller_buffer.cir with the network on its feedback wire.

Both sides run as subprocesses in the same run, taking turns: ``netloop check NETLIST --at out``
(the whole command: start-up, parse, probe, every widening and refinement round, analysis, report;
it keeps its decks, which is how the frequencies it simulated are learnt), and ``ngspice -b`` on
the deck a designer would write: the probe sources already in the netlist, a ``.control`` block
that saves the probe vectors, alters the excitation, runs ``ac`` for every sweep netloop ran (its
first decade sweep, any widening, the refinement's linear sweeps), alters again, runs them again,
and writes the vectors. Prints both wall times (best of ``--repeat``) and the ratio; target <= 1.05.

netloop runs as a designer would run it, with its defaults: on a netlist this large and a machine
with two free CPUs that means two ngspice processes, one per excitation (netloop.sim.split). A
third row, ``netloop check --processes 1``, runs everything in one ngspice as the hand deck does: its
ratio is netloop's own overhead (start-up, parse, probe, analysis, report) on top of ngspice's.
"""

from __future__ import annotations

import argparse
import re
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
TARGET = 1.05


def ladder(start: str, end: str, elements: int, r_ohm: str, c_f: str) -> list[str]:
    """An RC ladder of ``elements`` cards (R and C alternating) from node ``start`` to node ``end``."""
    sections = max(elements // 2, 1)
    lines, prev = [], start
    for i in range(sections):
        node = end if i == sections - 1 else f"p{i}"
        lines.append(f"Rp{i} {prev} {node} {r_ohm}")
        lines.append(f"Cp{i} {node} 0 {c_f}")
        prev = node
    return lines


def behavioural(elements: int, probed: bool) -> str:
    """A two-pole loop of controlled sources (DC gain 60 dB, crossover near 100 MHz) through the ladder.

    ``probed``: the designer's copy, the output source driving ``out_drv`` and the probe sources
    vprobe (series, from out_drv to out) and iprobe (shunt, into out_drv) written in by hand.
    """
    drive = "out_drv" if probed else "out"
    lines = [
        "behavioural loop through an RC parasitic network",
        f"Vin in 0 dc 0 ac {0 if probed else 1}",
        "E1 a 0 in fb 1000",
        "R1 a b 1k",
        "C1 b 0 1.59n",
        f"E2 {drive} 0 b 0 1",
    ]
    if probed:
        lines += ["vprobe out out_drv dc 0 ac 0", "iprobe 0 out_drv dc 0 ac 0"]
    lines += ladder("out", "fb", elements, "0.01", "1e-20")
    lines += ["Rl fb 0 1meg", ".end"]
    return "\n".join(lines) + "\n"


def miller(elements: int, probed: bool) -> str:
    """circuits/miller_buffer.cir with the ladder between its output and the gate of M1."""
    drive = "out_drv" if probed else "out"
    out = []
    for line in (ROOT / "circuits" / "miller_buffer.cir").read_text().splitlines():
        if line.startswith(".lib"):
            line = ".lib corners.lib tt"
        elif line.startswith("M1 "):
            line = "M1 d1 fb tail 0 nch w=20u l=1u"
        elif line.startswith(("M6 ", "M7 ")):
            line = line.replace(" out ", f" {drive} ", 1)
        elif line.startswith("Vin ") and probed:
            line = "Vin inp 0 dc {vcm} ac 0"
        elif line.strip() == ".end":
            continue
        out.append(line)
    if probed:
        out += ["vprobe out out_drv dc 0 ac 0", "iprobe 0 out_drv dc 0 ac 0"]
    out += ["* RC parasitic network on the feedback wire", *ladder("out", "fb", elements, "0.01", "1e-20"), ".end"]
    return "\n".join(out) + "\n"


CIRCUITS = {"behavioural": behavioural, "miller": miller}
SAVES = "v(out_drv) v(out) i(vprobe)"


def sweeps_of(deck_dir: Path) -> list[str]:
    """The ``ac`` commands netloop ran, in order: from its kept decks, each sweep once (its first run)."""
    commands = []
    for deck in sorted(deck_dir.glob("*.cir"), key=lambda p: p.stat().st_mtime_ns):
        block = deck.read_text().split(".control", 1)[1]
        first_run = block.split("alter", 3)  # [head, alter, alter(first run: ac lines), next alters...]
        commands += re.findall(r"^ac .*$", first_run[2] if len(first_run) > 2 else block, flags=re.MULTILINE)
    return commands


def hand_deck(netlist: str, sweeps: list[str]) -> str:
    """The designer's deck: netlist with probe sources, then both excitations over every sweep."""
    body = netlist.rstrip().removesuffix(".end").rstrip()
    steps = ["set filetype=binary", f"save {SAVES}"]
    for run, (series, shunt) in enumerate(((1, 0), (0, 1))):
        steps += [f"alter vprobe ac = {series}", f"alter iprobe ac = {shunt}"]
        for k, sweep in enumerate(sweeps):
            steps += [sweep, f"write run{run}_{k}.raw {SAVES}", "destroy all"]
    return body + "\n.control\n" + "\n".join(steps) + "\n.endc\n.end\n"


STAGES = """
import sys, time
t0 = time.perf_counter()
from netloop import report
from netloop.jobs.measure import measure_probed
from netloop.netlist import parse_file
from netloop.probe import break_loop
from netloop.sim import default_simulator
t1 = time.perf_counter()
netlist = parse_file(sys.argv[1])
t2 = time.perf_counter()
probed = break_loop(netlist, "out")
t3 = time.perf_counter()
sim = default_simulator()
t4 = time.perf_counter()
analysis, info, _ = measure_probed(probed, simulator=sim)
t5 = time.perf_counter()
sim.close()
print(f"  imports {t1 - t0:.2f} s, parse {t2 - t1:.2f} s, probe {t3 - t2:.2f} s, worker start {t4 - t3:.2f} s, "
      f"simulator {info.seconds:.2f} s, analysis {t5 - t4 - info.seconds:.2f} s")
"""


def timed(command: list[str], cwd: Path) -> tuple[float, subprocess.CompletedProcess]:
    start = time.perf_counter()
    done = subprocess.run(command, cwd=cwd, capture_output=True, text=True, check=False)
    return time.perf_counter() - start, done


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--elements", type=int, default=100_000, help="R and C cards in the parasitic network (default 100000)")
    parser.add_argument("--circuit", choices=tuple(CIRCUITS), default="behavioural")
    parser.add_argument("--repeat", type=int, default=1, help="runs of each side, taking turns; the fastest counts")
    parser.add_argument("--quick", action="store_true", help="a smoke run: 2000 elements")
    parser.add_argument("--stages", action="store_true", help="also time netloop's stages in one more (in-process) run")
    args = parser.parse_args()
    elements = 2000 if args.quick else args.elements
    build = CIRCUITS[args.circuit]
    netloop = str(Path(sys.executable).with_name("netloop"))
    ngspice = shutil.which("ngspice") or sys.exit("check_speed: ngspice is not on PATH")
    with tempfile.TemporaryDirectory(prefix="netloop-bench-") as tmp:
        work = Path(tmp)
        shutil.copy(ROOT / "circuits" / "models" / "corners.lib", work / "corners.lib")
        (work / "loop.cir").write_text(build(elements, probed=False))
        netloop_s, serial_s, hand_s, sweeps = [], [], [], []
        for i in range(args.repeat):
            decks = work / f"decks{i}"
            seconds, done = timed([netloop, "check", "loop.cir", "--at", "out", "--keep-decks", str(decks)], work)
            if done.returncode not in (0, 1):
                sys.exit(f"check_speed: netloop check failed ({done.returncode}): {done.stderr.strip()}")
            netloop_s.append(seconds)
            sweeps = sweeps_of(decks)
            seconds, done = timed([netloop, "check", "loop.cir", "--at", "out", "--processes", "1"], work)
            if done.returncode not in (0, 1):
                sys.exit(f"check_speed: netloop check --processes 1 failed ({done.returncode}): {done.stderr.strip()}")
            serial_s.append(seconds)
            (work / "hand.cir").write_text(hand_deck(build(elements, probed=True), sweeps))
            seconds, done = timed([ngspice, "-b", "hand.cir"], work)
            if "error" in done.stdout.lower() or not (work / "run1_0.raw").is_file():
                sys.exit(f"check_speed: the hand deck failed: {done.stdout[-2000:]}")
            hand_s.append(seconds)
        if args.stages:
            stages = subprocess.run([sys.executable, "-c", STAGES, "loop.cir"], cwd=work, capture_output=True, text=True, check=False)
            stage_line = stages.stdout.strip() or stages.stderr.strip()[-500:]
    t_netloop, t_serial, t_hand = min(netloop_s), min(serial_s), min(hand_s)
    ratio = t_netloop / t_hand
    print(f"{args.circuit} loop through a {elements}-element RC network; {len(sweeps)} ac sweeps x 2 excitations "
          f"({', '.join(s.split(' ', 1)[1] for s in sweeps)}); best of {args.repeat}")
    print(f"ngspice -b hand deck   {t_hand:8.2f} s   1.00")
    print(f"netloop check          {t_netloop:8.2f} s   {ratio:.3f}x ngspice   (its defaults)")
    print(f"netloop check --processes 1 {t_serial:8.2f} s   {t_serial / t_hand:.3f}x ngspice   (one ngspice: netloop's own overhead)")
    if args.stages:
        print("netloop stages (one more run, in process; the worker starts after the probe here):")
        print(stage_line)
    if args.quick:
        print(f"ratio netloop/ngspice {ratio:.3f} (quick smoke run: netloop's start-up dominates; the target is for 100000 elements)")
    else:
        print(f"ratio netloop/ngspice {ratio:.3f} ({'meets' if ratio <= TARGET else 'misses'} the {TARGET}x target)")


if __name__ == "__main__":
    main()
