"""netloop: loop gain and stability margins of feedback loops in SPICE netlists.

netlist   parse ngspice netlists into frozen records with source locations; write them back
graph     flattened connectivity and signal-flow graphs (networkx); loop discovery
probe     break a node (or a differential pair), insert an exact small-signal probe: a new netlist
sim       run ngspice (shared library in a worker process, or batch mode) on AC jobs
analysis  return ratio, margins, Nyquist count, peaking, closed-loop poles (numpy/scipy)
report    text, JSON, CSV, JUnit XML, plots and HTML from results
corners   corner plans run as a regression on Dask, results journalled line by line
statistics  Monte Carlo samples of a corner plan: the yield of the margins with Clopper-Pearson bounds
cli       the ``netloop`` command, a thin shell over this API

The composed jobs: ``measure`` (one loop), ``measure_pair`` (differential and common mode),
``check_loops`` (every loop group on its own, from the census ``take_census``; ``measure_all_loops``
gives only their results), ``compare`` (several breaks in one deck),
``run_plan`` (a corner plan from ``load_plan``), ``run_samples`` (a statistical plan from
``load_sample_plan``: the yield of the margins), ``sensitivities`` (which values set a loop's margins,
and the value of one that meets a requirement), ``read_results`` (a corner run's results file),
``compare_runs`` (a run against its baseline) and ``trend_of`` (the worst phase margin over several runs).
Names are imported on first use, so ``import netloop`` and ``netloop --help`` stay fast.
"""

from __future__ import annotations

import importlib

__version__ = "0.1.0"

_EXPORTS = {
    "AnalysisError": "netloop.errors",
    "BreakInfo": "netloop.jobs.loop_result",
    "CAUTION": "netloop.jobs.loop_result",
    "LoopAnalysis": "netloop.analysis",
    "LoopResult": "netloop.jobs.loop_result",
    "NetlistError": "netloop.errors",
    "NetlistSyntaxError": "netloop.errors",
    "NetloopError": "netloop.errors",
    "PairResult": "netloop.jobs.measure_pair",
    "PlanError": "netloop.errors",
    "ResultsError": "netloop.errors",
    "ProbeError": "netloop.errors",
    "SimulationError": "netloop.errors",
    "SimulatorUnavailableError": "netloop.errors",
    "Sweep": "netloop.jobs.measure",
    "UnknownNodeError": "netloop.errors",
    "analyse": "netloop.analysis",
    "check_loops": "netloop.jobs.discover",
    "break_loop": "netloop.probe",
    "Comparison": "netloop.jobs.compare",
    "compare": "netloop.jobs.compare",
    "compare_runs": "netloop.jobs.runs",
    "default_simulator": "netloop.sim",
    "find_loops": "netloop.graph",
    "flatten": "netloop.graph",
    "load_plan": "netloop.jobs.corners",
    "load_sample_plan": "netloop.jobs.statistics",
    "measure": "netloop.jobs.measure",
    "measure_all_loops": "netloop.jobs.discover",
    "measure_pair": "netloop.jobs.measure_pair",
    "parse_file": "netloop.netlist",
    "parse_text": "netloop.netlist",
    "read_results": "netloop.jobs.runs",
    "run_plan": "netloop.jobs.corners",
    "run_samples": "netloop.jobs.statistics",
    "SampleRun": "netloop.jobs.statistics",
    "SensitivityRun": "netloop.jobs.sensitivity",
    "take_census": "netloop.jobs.discover",
    "sensitivities": "netloop.jobs.sensitivity",
    "trend_of": "netloop.jobs.runs",
    "write_netlist": "netloop.netlist",
}

__all__ = sorted([*_EXPORTS, "__version__"])


def __getattr__(name: str):
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'netloop' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return __all__
