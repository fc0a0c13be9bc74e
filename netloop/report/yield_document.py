"""The JSON document (schema "netloop.yield/1") and the CSV of a statistical run.

Every key is always present; a quantity that does not exist is null. Fractions are plain numbers
between 0 and 1 (0.99, not 99); units are in the key names as in the loop document.

    schema          "netloop.yield/1"
    plan            the plan file
    results_file    the results file (one line per sample, with its loop document: netloop.corners/1 records)
    verdict, passed "pass" | "fail" | "inconclusive" (netloop.jobs.statistics.YieldStatistics.verdict); verdict == "pass"
    target          the yield target (null: none named), confidence: of every bound
    method          "Clopper-Pearson (1934)"
    samples         {count (at each corner), first_seed, last_seed, corners, nodes, measured (records), ran, skipped}
    deciding        the yield the verdict is about (every requirement over every corner and node), as in yields
    yields          [{requirement, corner, at, samples, passed, failed, no_verdict, estimate, interval [low, high],
                      lower, upper, supports}]: corner "" and at "" for the dies over every corner and node;
                      no-verdict samples count as failing in estimate, interval and lower, as passing in upper
    spreads         [{figure, name, unit, corner, at, count, mean, std, min, max, infinite, missing, without_verdict}]
    worst           [{sample, corner, at, seed, verdict, why, figures {pm, gm, fc, peak}, rerun}]
    needed          {target, confidence, with_no_failure, at_rate_seen, rate_seen} or null (no target)
    each_sample     [{sample, corner, at, seed, verdict, figures, met {requirement: true|false|null}}] in plan order
    caution         the statistical caution
    infinite        {dotted.path: "+inf" | "-inf"} for figures that are infinite (a gain margin without phase crossover)
"""

from __future__ import annotations

import csv
import io
import math
from pathlib import Path

from netloop.jobs.statistics import (
    FIGURES,
    STATISTICAL_CAUTION,
    SampleOutcome,
    SampleRun,
    Spread,
    Yield,
)
from netloop.report.files import output_file
from netloop.report.yield_text import METHOD, rerun_command, supports

__all__ = ["SAMPLE_COLUMNS", "SCHEMA", "sample_csv", "write_sample_csv", "yield_document"]

SCHEMA = "netloop.yield/1"


def _number(value: float | None, path: str, infinite: dict) -> float | None:
    if value is not None and not math.isfinite(value):
        infinite[path] = "+inf" if value > 0 else "-inf"
        return None
    return value


def _yield(y: Yield) -> dict:
    return {"requirement": y.requirement, "corner": y.corner, "at": y.at, "samples": y.samples, "passed": y.passed, "failed": y.failed,
            "no_verdict": y.no_verdict, "estimate": y.estimate, "interval": list(y.interval), "lower": y.lower, "upper": y.upper,
            "supports": supports(y) if y.samples else None}


def _spread(s: Spread) -> dict:
    name, unit, _ = FIGURES[s.figure]
    return {"figure": s.figure, "name": name, "unit": unit, "corner": s.corner, "at": s.at, "count": s.count, "mean": s.mean,
            "std": s.std, "min": s.min, "max": s.max, "infinite": s.infinite, "missing": s.missing, "without_verdict": s.without_verdict}


def _figures(s: SampleOutcome, path: str, infinite: dict) -> dict:
    return {k: _number(s.figures.get(k), f"{path}.figures.{k}", infinite) for k in FIGURES}


def yield_document(run: SampleRun) -> dict:
    """The run as one JSON-ready document (no NaN or infinity: see ``infinite``)."""
    stats, splan = run.statistics, run.plan
    infinite: dict[str, str] = {}
    worst = [{"sample": s.name, "corner": s.corner, "at": s.at, "seed": s.seed, "verdict": s.verdict, "why": s.why,
              "figures": _figures(s, f"worst.{i}", infinite), "rerun": rerun_command(run, s)} for i, s in enumerate(stats.worst)]
    each = [{"sample": s.name, "corner": s.corner, "at": s.at, "seed": s.seed, "verdict": s.verdict,
             "figures": _figures(s, f"each_sample.{i}", infinite), "met": dict(s.met)} for i, s in enumerate(stats.samples)]
    n = stats.needed
    return {
        "schema": SCHEMA,
        "plan": splan.plan.path,
        "results_file": run.run.results_path,
        "verdict": stats.verdict,
        "passed": stats.verdict == "pass",
        "target": stats.target,
        "confidence": stats.confidence,
        "method": METHOD,
        "samples": {"count": splan.count, "first_seed": splan.first_seed, "last_seed": splan.first_seed + splan.count - 1,
                    "corners": list(stats.corners), "nodes": list(stats.nodes), "measured": len(stats.samples), "ran": run.run.ran,
                    "skipped": run.run.skipped},
        "deciding": _yield(stats.deciding),
        "yields": [_yield(y) for y in stats.yields],
        "spreads": [_spread(s) for s in stats.spreads],
        "worst": worst,
        "needed": None if n is None else {"target": n.target, "confidence": n.confidence, "with_no_failure": n.with_no_failure,
                                          "at_rate_seen": n.at_rate_seen, "rate_seen": n.rate_seen},
        "each_sample": each,
        "caution": STATISTICAL_CAUTION,
        "infinite": infinite,
    }


SAMPLE_COLUMNS = ("sample", "corner", "at", "seed", "verdict", "phase_margin_deg", "gain_margin_db", "unity_gain_hz", "peak_db", "why")
"""The CSV's first columns; then one column per requirement: 1 met, 0 not met, empty without a verdict."""


def sample_csv(run: SampleRun) -> str:
    """One row per sample (and corner, break node), in plan order."""
    stats = run.statistics
    buf = io.StringIO()
    out = csv.writer(buf, lineterminator="\n")
    out.writerow([*SAMPLE_COLUMNS, *stats.requirements])
    for s in stats.samples:
        figures = ["" if s.figures.get(k) is None else repr(s.figures[k]) for k in FIGURES]
        met = ["" if s.met.get(r) is None else int(bool(s.met[r])) for r in stats.requirements]
        out.writerow([s.name, s.corner, s.at, s.seed, s.verdict, *figures, s.why, *met])
    return buf.getvalue()


def write_sample_csv(run: SampleRun, path: str | Path) -> Path:
    """Write sample_csv(run) to ``path``; returns the path (OutputError when it cannot)."""
    with output_file(path, "sample table") as out:
        out.write_text(sample_csv(run), encoding="utf-8")
    return out
