"""Time ``netloop --help`` against ``python -c pass`` (both as subprocesses, best of N); prints both and the ratio.

    .venv/bin/python benchmarks/help_startup.py [--repeat 10] [--quick]

Target: ``netloop --help`` under 0.3 s. The two commands take turns so that machine load hits both
alike. Also lists any heavy module (numpy, scipy, matplotlib, networkx, dask, PySpice, jinja2) that
``--help`` imports; there should be none.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time
from pathlib import Path

TARGET_S = 0.3
HEAVY = ("numpy", "scipy", "matplotlib", "networkx", "dask", "PySpice", "jinja2", "lark")


def best(command: list[str], repeat: int) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        subprocess.run(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True)
        times.append(time.perf_counter() - start)
    return min(times)


def heavy_imports(python: str) -> list[str]:
    """The heavy top-level packages ``netloop --help`` imports (from ``python -X importtime``)."""
    code = "import sys; sys.argv = ['netloop', '--help']; from netloop.cli.main import entry; entry()"
    done = subprocess.run([python, "-X", "importtime", "-c", code], capture_output=True, text=True, check=False)
    found = set()
    for line in done.stderr.splitlines():
        name = line.rpartition("|")[2].strip()
        if name.split(".")[0] in HEAVY:
            found.add(name.split(".")[0])
    return sorted(found)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=10)
    parser.add_argument("--quick", action="store_true", help="a smoke run: best of 3")
    args = parser.parse_args()
    repeat = 3 if args.quick else args.repeat
    netloop = str(Path(sys.executable).with_name("netloop"))
    python = sys.executable
    t_python = t_help = float("inf")
    for _ in range(repeat):  # take turns
        t_python = min(t_python, best([python, "-c", "pass"], 1))
        t_help = min(t_help, best([netloop, "--help"], 1))
    heavy = heavy_imports(python)
    print(f"best of {repeat}")
    print(f"python -c pass     {t_python * 1e3:8.1f} ms   1.00")
    print(f"netloop --help     {t_help * 1e3:8.1f} ms   {t_help / t_python:.2f}x python (target < {TARGET_S * 1e3:.0f} ms: "
          f"{'meets' if t_help < TARGET_S else 'misses'})")
    print(f"heavy imports for --help: {', '.join(heavy) if heavy else 'none'}")
    print(f"ratio netloop-help/python {t_help / t_python:.2f}")


if __name__ == "__main__":
    main()
