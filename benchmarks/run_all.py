"""Run every benchmark script in benchmarks/ one after the other and print their ratio lines in a summary.

    .venv/bin/python benchmarks/run_all.py [--quick] [--only NAME ...]

Each script runs as its own process (``make bench`` calls this with no flags: default sizes).
``--quick`` passes ``--quick`` on to every script, for a fast smoke run; a script without that flag
is then skipped and said so. Exits 1 when any script failed.
"""

from __future__ import annotations

import argparse
import re
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
# a line that states a ratio: the word, or a figure such as "1.73x"
RATIO = re.compile(r"\bratio\b|\d(?:\.\d+)?x\b", re.IGNORECASE)


def scripts() -> list[Path]:
    """Every benchmark script: the .py files here except this one and private helpers."""
    return sorted(p for p in HERE.glob("*.py") if p.name != Path(__file__).name and not p.name.startswith("_"))


def has_quick(script: Path) -> bool:
    return '"--quick"' in script.read_text(encoding="utf-8")


def ratio_lines(output: str) -> list[str]:
    """The lines of a benchmark's output that state a ratio."""
    return [line.strip() for line in output.splitlines() if RATIO.search(line)]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="pass --quick to every script (a smoke run)")
    parser.add_argument("--only", nargs="+", metavar="NAME", help="run only these scripts (file names, with or without .py)")
    args = parser.parse_args()
    chosen = scripts()
    if args.only:
        wanted = {name.removesuffix(".py") for name in args.only}
        chosen = [p for p in chosen if p.stem in wanted]
    summary: list[tuple[str, str, float, list[str]]] = []
    for script in chosen:
        if args.quick and not has_quick(script):
            summary.append((script.stem, "skipped (no --quick)", 0.0, []))
            continue
        command = [sys.executable, str(script), *(["--quick"] if args.quick else [])]
        print(f"== {script.name} {' '.join(command[2:])}".rstrip(), flush=True)
        start = time.perf_counter()
        done = subprocess.run(command, capture_output=True, text=True, check=False, cwd=HERE.parent)
        seconds = time.perf_counter() - start
        print(done.stdout.rstrip())
        if done.returncode != 0:
            print(done.stderr.rstrip(), file=sys.stderr)
        status = "ok" if done.returncode == 0 else f"FAILED (exit {done.returncode})"
        summary.append((script.stem, status, seconds, ratio_lines(done.stdout)))
    print("\n== summary")
    for name, status, seconds, ratios in summary:
        print(f"{name:18s} {status:22s} {seconds:7.1f} s")
        for line in ratios:
            print(f"    {line}")
    return 1 if any(s.startswith("FAILED") for _, s, _, _ in summary) else 0


if __name__ == "__main__":
    sys.exit(main())
