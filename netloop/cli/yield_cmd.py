"""``netloop yield PLAN.toml``: measure a statistical plan's samples on Dask, print the yield the data supports."""

from __future__ import annotations

import argparse
import json
import sys

from netloop.cli.check_cmd import process_count
from netloop.cli.corners_cmd import say_rerun, say_stale

__all__ = ["add_parser", "run"]


def fraction(text: str) -> float:
    """An argparse type: a fraction written "99%", "99.9%" or 0.99."""
    from netloop.jobs.statistics import parse_fraction

    try:
        return parse_fraction(text, "the value")
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from exc


def add_parser(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("plan", help="the statistical plan: a corner plan with a [samples] table (see the README section 'Statistical yield')")
    where = parser.add_mutually_exclusive_group()
    where.add_argument("--workers", type=process_count, metavar="N",
                       help="Dask worker processes of the local cluster, each with its own ngspice (default: one per CPU)")
    where.add_argument("--cluster", metavar="ADDRESS", help="run on an existing Dask scheduler, e.g. tcp://10.0.0.5:8786, instead of a local cluster")
    parser.add_argument("--out", metavar="FILE.jsonl", help="the results file, one JSON line per sample (default: PLAN.results.jsonl next to the plan)")
    again = parser.add_mutually_exclusive_group()
    again.add_argument("--resume", action="store_true", help="continue an existing results file: samples already in it are not run again")
    again.add_argument("--force", action="store_true", help="replace an existing results file (without --resume or --force it is never overwritten)")
    parser.add_argument("--progress", action="store_true", help="draw the progress bar even when stderr is not a terminal")
    parser.add_argument("--target", type=fraction, metavar="YIELD", help="the yield to show, e.g. 99%% or 0.999: decides PASS, FAIL or INCONCLUSIVE "
                        "(default: the plan's target; without one, every sample must pass)")
    parser.add_argument("--confidence", type=fraction, metavar="LEVEL", help="confidence of the bounds and the verdict, e.g. 95%% (default: the plan's, else 95%%)")
    parser.add_argument("--json", action="store_true", help="print one JSON document (schema netloop.yield/1) instead of the summary")
    parser.add_argument("--csv", metavar="FILE", help="also write one CSV row per sample (with --sample: the sampled return ratio, as check writes it)")
    parser.add_argument("--plot", metavar="FILE", help="also write the histograms to FILE (.png, .svg or .pdf) and the scatter of phase margin "
                        "against crossover frequency to FILE-scatter (with --sample: Bode and Nyquist plots, as check writes them)")
    parser.add_argument("--report", metavar="FILE", help="also write a self-contained HTML report")
    parser.add_argument("--sample", metavar="NAME", help="measure one sample again, alone, and report it as 'netloop check' does, e.g. --sample '27C#17' "
                        "(the same T bit for bit as in the results file); nothing is written to the results file")
    parser.add_argument("--keep-decks", metavar="DIR", help="with --sample: keep the ngspice decks netloop writes in DIR")


def _refuse_bad_outputs(args: argparse.Namespace) -> None:
    """OutputError before any sample runs for a --csv, --plot or --report path that cannot be written."""
    from netloop.report.files import refuse_unwritable

    if args.plot:
        from netloop.report.figure import file_format
        from netloop.report.yield_plot import scatter_path

        file_format(args.plot)
        refuse_unwritable(args.plot, "histograms")
        refuse_unwritable(scatter_path(args.plot), "scatter plot")
    refuse_unwritable(args.csv, "sample table")
    refuse_unwritable(args.report, "HTML report")


def run(args: argparse.Namespace) -> int:
    from netloop.cli.main import exit_status
    from netloop.jobs import statistics

    splan = statistics.load_sample_plan(args.plan)
    if args.sample is not None:
        return _one_sample(args, splan)
    if args.keep_decks:
        from netloop.errors import NetloopError

        raise NetloopError("--keep-decks goes with --sample (one sample measured here); the workers of a whole run keep no decks")
    _refuse_bad_outputs(args)
    progress = args.progress or sys.stderr.isatty()
    result = statistics.run_samples(splan, workers=args.workers, cluster=args.cluster, out=args.out, resume=args.resume, force=args.force,
                                    progress=progress, target=args.target, confidence=args.confidence)
    say_rerun(result.run, "sample")
    from netloop.report import yield_document, yield_text

    if args.json:  # the results first: a file that cannot be written afterwards loses nothing
        print(json.dumps(yield_document.yield_document(result), indent=2, allow_nan=False))
    else:
        print(yield_text.yield_summary(result))
    say_stale(result.run, "sample", "left out of the statistics")
    sys.stdout.flush()
    if args.csv:
        yield_document.write_sample_csv(result, args.csv)
    if args.plot:
        from netloop.report.yield_plot import plot_yield

        plot_yield(result, args.plot)
    if args.report:
        from netloop.report.yield_html import write_yield_html

        write_yield_html(result, args.report)
    return exit_status(result.verdict)


def _one_sample(args: argparse.Namespace, splan) -> int:
    """--sample NAME: the sample measured again here, reported as `netloop check` reports a loop."""
    from netloop.cli.check_cmd import refuse_bad_outputs, write_outputs
    from netloop.cli.main import exit_status
    from netloop.jobs import statistics
    from netloop.jobs.loop_result import combined_verdict

    for option in ("workers", "cluster", "out", "target", "confidence"):
        if getattr(args, option) not in (None, False):
            from netloop.errors import NetloopError

            raise NetloopError(f"--sample measures one sample here and reports it as 'netloop check' does; --{option} does not go with it")
    if args.resume or args.force or args.progress:
        from netloop.errors import NetloopError

        raise NetloopError("--sample writes nothing to the results file; --resume, --force and --progress do not go with it")
    refuse_bad_outputs(args)
    results = statistics.rerun_sample(splan, args.sample, keep_decks=args.keep_decks)
    from netloop import report

    if args.json:
        doc = report.to_document(results[0]) if len(results) == 1 else report.multi_document("loops", results)
        print(json.dumps(doc, indent=2, allow_nan=False))
    else:
        print("\n\n".join(report.format_text(r) for r in results))
    write_outputs(args, list(results))
    return exit_status(combined_verdict(r.verdict for r in results))
