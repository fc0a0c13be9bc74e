"""Time netloop's netlist reader and flattening against PySpice's parser, and the whole ``netloop inspect``.

    .venv/bin/python benchmarks/parse_speed.py [--small 100000] [--large 1000000] [--repeat 3]

Netlists are flat RC ladders (R and C cards alternating, one source) written to a temp dir,
and for inspect also the same size built hierarchically from X instances of one cell.
Every measurement runs in a fresh child process, and the CPU seconds (user + system, from
os.wait4) of that child are compared, so other load on the machine bends the ratio little;
wall time and peak RSS are printed beside. Targets: netloop >= 10x PySpice on the small netlist
(parse + flattened graph vs ``SpiceParser(source=...).build_circuit()``), and ``netloop inspect``
of the large netlist within 5 s and 1.5 GB peak.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CHILD = {
    "netloop": (
        "import sys\n"
        "from netloop.netlist import parse_text\n"
        "from netloop.graph import connectivity_graph, flatten\n"
        "import time\n"
        "text = open(sys.argv[1]).read()\n"
        "t = time.process_time()\n"
        "netlist = parse_text(text)\n"
        "t1 = time.process_time()\n"
        "flat = flatten(netlist)\n"
        "t2 = time.process_time()\n"
        "graph = connectivity_graph(flat)\n"
        "print(t2 - t, len(flat), flat.node_count, t1 - t, time.process_time() - t2)\n"
    ),
    "pyspice": (
        "import sys, warnings, logging\n"
        "warnings.simplefilter('ignore')\n"
        "logging.disable(logging.CRITICAL)\n"
        "from PySpice.Spice.Parser import SpiceParser\n"
        "import time\n"
        "text = open(sys.argv[1]).read()\n"
        "t = time.process_time()\n"
        "circuit = SpiceParser(source=text).build_circuit()\n"
        "print(time.process_time() - t, len(list(circuit.elements)), len(list(circuit.nodes)))\n"
    ),
}


def write_ladder(path: Path, elements: int) -> None:
    with path.open("w") as fh:
        fh.write("flat rc ladder for the parse benchmark\nV1 n0 0 dc 1 ac 1\n")
        for i in range((elements - 1) // 2):
            fh.write(f"R{i} n{i} n{i + 1} 1k\nC{i} n{i + 1} 0 1p\n")
        fh.write(".op\n.end\n")


def write_hierarchical(path: Path, elements: int) -> None:
    """The same ladder built from X instances of one 102-element cell (exercises the flattening)."""
    with path.open("w") as fh:
        fh.write("hierarchical rc ladder for the parse benchmark\n.subckt cell a b\n")
        for i in range(50):
            fh.write(f"R{i} n{i} n{i + 1} 1k\nC{i} n{i + 1} 0 1p\n")
        fh.write("Ra a n0 1\nRb n50 b 1\n.ends cell\nV1 t0 0 dc 1\n")
        for j in range(max(1, elements // 102)):
            fh.write(f"X{j} t{j} t{j + 1} cell\n")
        fh.write(".end\n")


def measure(argv: list[str]) -> tuple[float, float, float, str]:
    """(cpu seconds, wall seconds, peak RSS MB, stdout) of one child process."""
    start = time.perf_counter()
    proc = subprocess.Popen(argv, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    out = proc.stdout.read().decode()
    err = proc.stderr.read().decode()
    _pid, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - start
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode != 0:
        raise SystemExit(f"{argv[:3]} failed:\n{err}")
    return usage.ru_utime + usage.ru_stime, wall, usage.ru_maxrss / 1024, out.strip()


def best(argv: list[str], repeat: int) -> tuple[float, float, float, str]:
    """The run with the least CPU time."""
    runs = [measure(argv) for _ in range(repeat)]
    return min(runs, key=lambda r: r[0])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--small", type=int, default=100_000)
    ap.add_argument("--large", type=int, default=1_000_000)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--quick", action="store_true", help="a smoke run: 2000 and 5000 elements, once")
    args = ap.parse_args()
    if args.quick:
        args.small, args.large, args.repeat = 2000, 5000, 1
    py = sys.executable
    with tempfile.TemporaryDirectory() as tmp:
        small, large = Path(tmp) / "small.cir", Path(tmp) / "large.cir"
        write_ladder(small, args.small)
        write_ladder(large, args.large)
        ours = best([py, "-c", CHILD["netloop"], str(small)], args.repeat)
        theirs = best([py, "-c", CHILD["pyspice"], str(small)], max(1, args.repeat - 1))
        ours_total, ours_parse = float(ours[3].split()[0]), float(ours[3].split()[3])
        theirs_parse = float(theirs[3].split()[0])
        print(f"{args.small} elements: netloop parse_text (+ flatten) vs PySpice SpiceParser(source=...).build_circuit()")
        print("  CPU seconds (time.process_time in the child, imports excluded); whole child process beside")
        print("  (the netloop child also imports networkx and builds the connectivity graph, timed on its own line)")
        print(f"  netloop  parse {ours_parse:6.2f} s, + flatten {ours_total:6.2f} s | process cpu {ours[0]:6.2f} s wall {ours[1]:6.2f} s "
              f"peak {ours[2]:5.0f} MB | {ours[3].split()[1]} elements {ours[3].split()[2]} nodes")
        print(f"  PySpice  parse {theirs_parse:6.2f} s                   | process cpu {theirs[0]:6.2f} s wall {theirs[1]:6.2f} s "
              f"peak {theirs[2]:5.0f} MB | {theirs[3].split()[1]} elements {theirs[3].split()[2]} nodes")
        print(f"  netloop  networkx connectivity graph built on demand: {float(ours[3].split()[4]):.2f} s more")
        print(f"  ratio PySpice / netloop: parser vs parser {theirs_parse / ours_parse:.1f}x, vs parse + flattened graph "
              f"{theirs_parse / ours_total:.1f}x   (target >= 10x)")
        hier = Path(tmp) / "hier.cir"
        write_hierarchical(hier, args.large)
        for label, path in (("flat", large), ("hierarchical", hier)):
            inspect = [py, "-c", "from netloop.cli.main import entry; entry()", "inspect", str(path), "--json"]
            whole = best(inspect, args.repeat)
            print(f"netloop inspect --json, {label} ~{args.large} elements (whole process, best of {args.repeat}):")
            print(f"  cpu {whole[0]:.2f} s  wall {whole[1]:.2f} s  peak RSS {whole[2]:.0f} MB   (targets: 5 s, 1536 MB)")


if __name__ == "__main__":
    main()
