"""``netloop trend RUN.jsonl ...``: the worst phase margin of each corner over several results files, oldest first."""

from __future__ import annotations

import argparse
import json

__all__ = ["add_parser", "run"]


def add_parser(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("results", nargs="+", metavar="RUN.jsonl",
                        help="results files of `netloop corners`, oldest first (see the README section 'Baselines and trends')")
    parser.add_argument("--plot", metavar="FILE", help="also write the chart: worst phase margin per corner, run by run (.png, .svg or .pdf)")
    parser.add_argument("--json", action="store_true", help="print one JSON document (schema netloop.trend/1) instead of the table")


def run(args: argparse.Namespace) -> int:
    from netloop.jobs.runs import read_results, trend_of
    from netloop.report.figure import file_format
    from netloop.report.files import refuse_unwritable
    from netloop.report.trend import plot_trend, trend_document, trend_table

    if args.plot:
        file_format(args.plot)
        refuse_unwritable(args.plot, "trend chart")
    trend = trend_of(tuple(read_results(path) for path in args.results))
    if args.plot:
        plot_trend(trend, args.plot)
    if args.json:
        print(json.dumps(trend_document(trend), indent=2, allow_nan=False))
    else:
        print(trend_table(trend))
        if args.plot:
            print(f"chart: {args.plot}")
    return 0
