"""``netloop corners PLAN.toml``: run a corner plan on Dask, print the worst corners first, exit 1 if any fails."""

from __future__ import annotations

import argparse
import json
import sys

from netloop.cli.check_cmd import process_count

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


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from netloop.jobs import corners
    from netloop.report import corner_records

    from netloop.report.files import refuse_unwritable

    plan = corners.load_plan(args.plan)
    refuse_unwritable(args.csv, "corner table")  # before any corner runs
    refuse_unwritable(args.junit, "JUnit XML")
    progress = args.progress or sys.stderr.isatty()
    result = corners.run_plan(plan, jobs=args.workers, cluster=args.cluster, out=args.out, resume=args.resume, force=args.force, progress=progress)
    if result.rerun:  # said first: the table below holds the new measurements of these corners
        changed = sorted({f for files in result.rerun.values() for f in files})
        print(f"netloop: {len(result.rerun)} corner(s) measured again because their input files changed since they were recorded: "
              + ", ".join(changed[:5]) + (f" and {len(changed) - 5} more" if len(changed) > 5 else ""), file=sys.stderr)
    if args.json:  # the results first: a file that cannot be written afterwards loses nothing
        print(json.dumps(corner_records.run_document(result), indent=2, allow_nan=False))
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
        note = f"; {result.skipped} found done in the results file" if result.skipped else ""
        print(f"results: {result.results_path} ({result.ran} run now{note})")
        if result.stale:
            print(f"netloop: {result.stale} record(s) in the results file belong to no corner of this plan "
                  "(the plan changed since they were written) and were left out", file=sys.stderr)
    sys.stdout.flush()
    if args.csv:
        corner_records.write_corner_csv(result.records, args.csv)
    if args.junit:
        corner_records.write_junit(result.records, args.junit, suite=Path(plan.path).stem)
    from netloop.cli.main import exit_status

    return exit_status(result.verdict)
