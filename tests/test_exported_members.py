"""The public surface of ``netloop`` is explicit, sorted, and every name in it resolves."""

from __future__ import annotations

import subprocess
import sys

import netloop


def test_all_is_sorted_and_pinned():
    """__all__ is the sorted list of exactly these names (a change here is a change of the public API)."""
    expected = [
        "AnalysisError", "BreakInfo", "CAUTION", "LoopAnalysis", "LoopResult", "NetlistError",
        "NetlistSyntaxError", "NetloopError", "PairResult", "PlanError", "ProbeError", "ResultsError",
        "SimulationError", "SimulatorUnavailableError", "Sweep", "UnknownNodeError",
        "__version__", "analyse", "break_loop", "check_loops", "compare", "Comparison", "default_simulator",
        "find_loops", "flatten", "load_plan", "measure", "measure_all_loops", "measure_pair", "parse_file",
        "parse_text", "run_plan", "load_sample_plan", "run_samples", "SampleRun", "SensitivityRun", "sensitivities", "take_census",
        "write_netlist", "compare_runs", "read_results", "trend_of",
    ]
    assert netloop.__all__ == sorted(expected)


def test_every_exported_name_resolves():
    """Each exported name is importable (lazy loading hides no broken import)."""
    for name in netloop.__all__:
        assert getattr(netloop, name) is not None, name


def test_import_netloop_is_light():
    """Importing the package loads neither numpy nor PySpice (so `netloop --help` stays fast)."""
    code = "import sys, netloop; print('numpy' in sys.modules, 'PySpice' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()
    assert out == ["False", "False"]
