"""`python -m netloop` is the netloop command: the way to run it from a source tree without the installed script."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def _module(*args: str) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    return subprocess.run([sys.executable, "-m", "netloop", *args], capture_output=True, text=True, timeout=120, env=env, cwd=ROOT)


def test_python_dash_m_netloop_runs_the_command_and_keeps_its_exit_status(tmp_path):
    """`python -m netloop --help` prints the command's help (exit 0), and a netlist typo gives its one error line with
    file:line and exit 2, as the installed script does (before: "No module named netloop.__main__", exit 1)."""
    shown = _module("--help")
    assert shown.returncode == 0 and "usage: netloop" in shown.stdout
    bad = tmp_path / "bad.cir"
    bad.write_text("title\nR1 a 0 1k\nR2 a\n.end\n")
    refused = _module("loops", str(bad))
    assert refused.returncode == 2 and refused.stderr.startswith(f"netloop: error: {bad}:3:")
