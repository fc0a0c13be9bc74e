"""Every benchmark script runs in a quick smoke run and states a ratio (a functional check, no timing)."""

from __future__ import annotations

import importlib.util
import subprocess
import sys
from pathlib import Path

import pytest

BENCHMARKS = Path(__file__).resolve().parents[2] / "benchmarks"


def _run_all():
    spec = importlib.util.spec_from_file_location("bench_run_all", BENCHMARKS / "run_all.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


RUN_ALL = _run_all()
QUICK = [p for p in RUN_ALL.scripts() if RUN_ALL.has_quick(p)]


def test_run_all_finds_the_speed_scripts():
    """run_all sees the scripts of the speed targets (check, --help start-up) and they take --quick."""
    names = {p.stem for p in QUICK}
    assert {"check_speed", "help_startup"} <= names


@pytest.mark.ngspice
@pytest.mark.parametrize("script", QUICK, ids=[p.stem for p in QUICK])
def test_benchmark_quick_run_exits_0_and_prints_a_ratio(script, tmp_path):
    """The script's --quick run exits 0 and prints at least one ratio line."""
    done = subprocess.run([sys.executable, str(script), "--quick"], capture_output=True, text=True, cwd=tmp_path, timeout=120, check=False)
    assert done.returncode == 0, done.stderr[-2000:]
    assert RUN_ALL.ratio_lines(done.stdout), done.stdout
