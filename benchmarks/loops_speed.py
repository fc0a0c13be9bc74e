"""Loop discovery on a large netlist, timed against parsing the same netlist in one run.

The netlist: two-stage Miller amplifiers (invented models, never simulated here) whose outputs
each drive one corner of a large RC grid (an interconnect model); one amplifier's feedback returns
through a long RC ladder, so a loop crosses a passive network of thousands of nodes. Passive
networks are collapsed before cycle enumeration (netloop.graph.passive_networks), so the grid adds
one pass over its elements and no cycles.

    .venv/bin/python benchmarks/loops_speed.py [ELEMENTS]   (default 100000)

Prints the time to parse, to flatten, to find the loops, and the ratio (flatten + loops) / parse
(networkx, imported on first use, is imported before the clock starts and timed apart).
"""

from __future__ import annotations

import math
import sys
import tempfile
import time
from pathlib import Path

from netloop.graph.loops import find_loops
from netloop.graph import flatten
from netloop.netlist import parse_file

AMP = """* amplifier {k}
M5{k} tail{k} nbias 0 0 nch w=20u l=1u
M1{k} d1{k} {fb} tail{k} 0 nch w=20u l=1u
M2{k} o1{k} inp tail{k} 0 nch w=20u l=1u
M3{k} d1{k} d1{k} vdd vdd pch w=20u l=1u
M4{k} o1{k} d1{k} vdd vdd pch w=20u l=1u
M6{k} out{k} o1{k} vdd vdd pch w=80u l=1u
M7{k} out{k} nbias 0 0 nch w=50u l=1u
Rz{k} o1{k} cz{k} 1.5k
Cc{k} cz{k} out{k} 1.2p
"""


def build(elements: int) -> str:
    amps = 4
    ladder = 2000  # the RC ladder in amplifier 0's feedback path: 2 elements per section
    lines = ["large netlist for the loop-discovery benchmark (invented)", ".model nch nmos level=1", ".model pch pmos level=1",
             "Vdd vdd 0 3.3", "Vin inp 0 1.65", "Ibias vdd nbias 20u", "M8 nbias nbias 0 0 nch w=10u l=1u"]
    for k in range(amps):
        lines.append(AMP.format(k=k, fb=f"lad{ladder}" if k == 0 else f"out{k}"))
    prev = "out0"
    for i in range(1, ladder + 1):
        lines.append(f"Rl{i} {prev} lad{i} 10")
        lines.append(f"Cl{i} lad{i} 0 1f")
        prev = f"lad{i}"
    used = len(lines)
    # square RC grid: each cell has one R to the right, one R down and one C to ground
    side = max(2, int(math.sqrt(max(elements - used, 0) / 3)))
    for r in range(side):
        for c in range(side):
            here = f"g{r}_{c}"
            if c + 1 < side:
                lines.append(f"Rh{r}_{c} {here} g{r}_{c + 1} 1")
            if r + 1 < side:
                lines.append(f"Rv{r}_{c} {here} g{r + 1}_{c} 1")
            lines.append(f"Cg{r}_{c} {here} 0 1f")
    for k in range(amps):  # each amplifier output drives one grid corner
        corner = [(0, 0), (0, side - 1), (side - 1, 0), (side - 1, side - 1)][k]
        lines.append(f"Rt{k} out{k} g{corner[0]}_{corner[1]} 1")
    lines.append(".end")
    return "\n".join(lines) + "\n"


def main() -> None:
    args = [a for a in sys.argv[1:] if a != "--quick"]
    elements = 2000 if "--quick" in sys.argv[1:] else int(args[0]) if args else 100_000  # --quick: a smoke run
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "large.cir"
        path.write_text(build(elements))
        t = time.perf_counter()
        import networkx  # noqa: F401 - imported on first use by find_loops; timed apart
        import_s = time.perf_counter() - t
        t0 = time.perf_counter()
        netlist = parse_file(path)
        t1 = time.perf_counter()
        flat = flatten(netlist)
        t2 = time.perf_counter()
        found = find_loops(flat)
        t3 = time.perf_counter()
    parse_s, flat_s, loops_s = t1 - t0, t2 - t1, t3 - t2
    loops = sum(len(g.loops) for g in found.groups)
    print(f"elements: {len(flat)}  signal nodes: {found.signal_nodes}  loop groups: {len(found.groups)}  loops: {loops}")
    for g in found.groups:
        print(f"  {g.label}: {len(g.loops)} loops, best break {g.best.node}")
    print(f"import networkx {import_s:8.3f} s (once per process, not in the ratio)")
    print(f"parse   {parse_s:8.3f} s")
    print(f"flatten {flat_s:8.3f} s")
    print(f"loops   {loops_s:8.3f} s")
    print(f"ratio (flatten + loops) / parse: {(flat_s + loops_s) / parse_s:.2f}")


if __name__ == "__main__":
    main()
