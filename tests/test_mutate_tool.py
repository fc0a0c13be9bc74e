"""tools/mutate.py never prints a kill rate from an earlier run's verdicts when mutmut gave up before testing."""

from __future__ import annotations

import importlib.util
import subprocess
from pathlib import Path

import pytest

TOOL = Path(__file__).resolve().parents[1] / "tools" / "mutate.py"


def _tool():
    spec = importlib.util.spec_from_file_location("mutate_tool", TOOL)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_a_stopped_mutmut_run_gives_no_figures(tmp_path, monkeypatch):
    """mutmut 3.8.1 exits 1 after "failed to collect stats" (a test failing under its wrappers): the script stops with a
    message instead of going on to list the copy's old verdicts; a run that tested its mutants (exit 0) goes on."""
    mutate = _tool()
    calls = []

    def fake(work, *args, quiet=False):
        calls.append(args)
        return subprocess.CompletedProcess(["mutmut", *args], returncode=1 if "bad" in args else 0)

    monkeypatch.setattr(mutate, "_mutmut", fake)
    mutate.run_mutants(tmp_path, 2, "good")
    with pytest.raises(SystemExit, match="stopped before testing.*earlier run's"):
        mutate.run_mutants(tmp_path, 2, "bad")
    assert calls == [("run", "--max-children", "2", "good"), ("run", "--max-children", "2", "bad")]
