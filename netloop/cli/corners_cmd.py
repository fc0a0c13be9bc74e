"""``netloop corners PLAN.toml``: run a corner plan on Dask, print the worst corners first, exit 1 if any fails."""

from __future__ import annotations

import argparse
import json
import sys

from netloop.cli.check_cmd import process_count
from netloop.jobs.loop_result import combined_verdict

__all__ = ["add_parser", "run"]


def add_parser(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("plan", help="the corner plan (TOML); see the README section 'Corner regressions'")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--workers", type=process_count, metavar="N",
                       help="Dask worker processes of the local cluster, each with its own ngspice (default: one per CPU)")
    where.add_argument("--jobs", dest="workers", type=process_count, help=argparse.SUPPRESS)  # the earlier name of --workers
    where.add_argument("--cluster", metavar="ADDRESS", help="run on an existing Dask scheduler, e.g. tcp://10.0.0.5:8786, instead of a local cluster")
    parser.add_argument("--out", metavar="FILE.jsonl", help="the results file, one JSON line per corner (default: PLAN.results.jsonl next to the plan)")
    again = parser.add_mutually_exclusive_group()
    again.add_argument("--resume", action="store_true", help="continue an existing results file: corners already in it are not run again")
    again.add_argument("--force", action="store_true", help="replace an existing results file (without --resume or --force it is never overwritten)")
    parser.add_argument("--progress", action="store_true", help="draw the progress bar even when stderr is not a terminal")
    parser.add_argument("--json", action="store_true", help="print one JSON document (schema netloop.corners/1) instead of the table")
    parser.add_argument("--csv", metavar="FILE", help="also write one CSV row per corner")
    parser.add_argument("--junit", metavar="FILE", help="also write JUnit XML, one test case per corner, for CI systems")
    parser.add_argument("--report", metavar="FILE.html", help="also write one self-contained HTML page: the table, the maps, "
                        "the worst corners' Bode and Nyquist plots and each corner's details")
    parser.add_argument("--maps", metavar="DIR", help="also write maps of the margins over the plan's numeric axes into DIR (PNG and SVG)")
    parser.add_argument("--baseline", metavar="FILE.jsonl", help="compare with an earlier results file, corner by corner; a figure "
                        "worse than its limit fails the run (exit status 1) even when every requirement passes")
    parser.add_argument("--limit", metavar="FIGURE=AMOUNT", action="append", default=[],
                        help="how much worse than the baseline a figure may get: pm=2deg, gm=1dB, fc=10%%, peak=0.5dB "
                             "(repeat for several; replaces the plan's [regression] limit on that figure)")


def say_rerun(run, noun: str) -> None:
    """On stderr: how many of the run's corners (or samples: ``noun``) were measured again because their input files changed
    since the results file recorded them, and which files (netloop.jobs.corners.runner.CornerRun.rerun)."""
    if run.rerun:
        changed = sorted({f for files in run.rerun.values() for f in files})
        print(f"netloop: {len(run.rerun)} {noun}(s) measured again because their input files changed since they were recorded: "
              + ", ".join(changed[:5]) + (f" and {len(changed) - 5} more" if len(changed) > 5 else ""), file=sys.stderr)


def say_stale(run, noun: str, left_out: str = "left out") -> None:
    """On stderr, whatever stdout holds (the documents of --json do not count them): how many records of the results file
    belong to no corner (or sample) of the plan and were ``left_out``."""
    if run.stale:
        print(f"netloop: {run.stale} record(s) in the results file belong to no {noun} of this plan (the plan changed since they "
              f"were written) and were {left_out}", file=sys.stderr)


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from netloop.jobs import corners
    from netloop.report import corner_records

    from netloop.report.files import refuse_unwritable

    plan = corners.load_plan(args.plan)
    refuse_unwritable(args.csv, "corner table")  # before any corner runs
    refuse_unwritable(args.junit, "JUnit XML")
    refuse_unwritable(args.report, "HTML report")
    if args.maps:
        from netloop.report.maps import refuse_maps_folder

        refuse_maps_folder(args.maps)
    baseline, limits = _baseline(args, plan)  # a bad limit or baseline stops the run before anything is simulated
    progress = args.progress or sys.stderr.isatty()
    result = corners.run_plan(plan, jobs=args.workers, cluster=args.cluster, out=args.out, resume=args.resume, force=args.force, progress=progress)
    comparison = None
    if baseline is not None:
        from netloop.jobs.runs import compare_runs

        comparison = compare_runs(baseline.records, result.records, limits, baseline_path=baseline.path)
    verdict = combined_verdict([result.verdict, *([comparison.verdict] if comparison else [])])
    units = dict(plan.units)
    say_rerun(result, "corner")  # said first: the table below holds the new measurements of these corners
    if args.json:  # the results first: a file that cannot be written afterwards loses nothing
        doc = corner_records.run_document(result)
        if comparison is not None:
            from netloop.report.baseline import baseline_document

            doc["baseline"] = baseline_document(comparison)
            doc["verdict"], doc["passed"] = verdict, verdict == "pass"
        print(json.dumps(doc, indent=2, allow_nan=False))
    else:
        print(corner_records.corner_table(result.records))
        print()
        print(corner_records.counts_line(result.records))
        loads = corner_records.loads_line(result.records)
        if loads:
            print(loads)
        for r in corner_records.worst_first(result.records):
            if corner_records.verdict(r) in ("error", "inconclusive"):
                at = f" at {r['at']}" if len({x["at"] for x in result.records}) > 1 else ""
                print("\n".join(f"  {r['corner']}{at}: {why}" for why in corner_records.reasons(r)))
        from netloop.report.boundaries import boundary_text

        where = boundary_text(result.records, plan.requirements, units)
        if where:
            print(f"\n{where}")
        if comparison is not None:
            _print_comparison(comparison)
        note = f"; {result.skipped} found done in the results file" if result.skipped else ""
        print(f"results: {result.results_path} ({result.ran} run now{note})")
    say_stale(result, "corner")
    sys.stdout.flush()
    if args.csv:
        corner_records.write_corner_csv(result.records, args.csv)
    if args.junit:
        from netloop.report.baseline import regression_suite

        suite = Path(plan.path).stem
        corner_records.write_junit(result.records, args.junit, suite=suite, more=[regression_suite(comparison, suite)] if comparison else [])
    if args.maps:
        from netloop.report.maps import write_maps

        written = write_maps(result.records, args.maps, plan.requirements, units)
        print(f"maps: {len(written)} file(s) in {args.maps}" if written else "maps: none (the plan has no numeric axis with two values or more)",
              file=sys.stderr if args.json else sys.stdout)
    if args.report:
        from netloop.report.corner_page import write_corner_html

        write_corner_html(result.records, args.report, verdict=verdict, title=f"netloop corners: {Path(plan.path).name}",
                          plan=plan.path, results_file=result.results_path, requirements=plan.requirements, units=units,
                          comparison=comparison)
        if not args.json:
            print(f"report: {args.report}")
    from netloop.cli.main import exit_status

    return exit_status(verdict)


def _baseline(args: argparse.Namespace, plan):
    """(baseline results, limits) from --baseline/--limit and the plan's [regression] table; (None, limits) without a
    baseline. Bad input is an error here, before any corner runs."""
    from pathlib import Path

    from netloop.errors import PlanError
    from netloop.jobs.corners import default_results_path
    from netloop.jobs.runs import parse_limits, read_results

    limits = parse_limits(args.limit, plan.limits)
    path = args.baseline or plan.baseline
    if not path:
        if args.limit:
            raise PlanError("--limit needs a baseline to compare with: add --baseline FILE.jsonl (an earlier results file)")
        return None, limits
    out = Path(args.out) if args.out else default_results_path(plan.path)
    if Path(path).resolve() == out.resolve():
        raise PlanError(f"the baseline {path} is the results file this run writes; compare with a copy of it "
                        "(or write this run elsewhere with --out)")
    return read_results(path), limits


def _print_comparison(comparison) -> None:
    from netloop.report.baseline import changes_table, regression_sentence, summary_line

    print()
    print(summary_line(comparison))
    if comparison.changes:
        print(changes_table(comparison))
    several = len({c.at for c in comparison.changes if c.at}) > 1
    for reg in comparison.regressions:
        print(f"  REGRESSION {regression_sentence(reg, several_nodes=several)}")
    for kind, keys in (("new (not in the baseline)", comparison.new), ("vanished (not in this run)", comparison.vanished)):
        if keys:
            print(f"{kind}: {', '.join(k + (f' at {a}' if several and a else '') for k, a in keys)}")
