"""``netloop sensitivity NETLIST --at NODE``: which values set the loop's margins, and what value meets a requirement."""

from __future__ import annotations

import argparse
import json

from netloop.cli.check_cmd import (
    add_measure_options,
    node_name,
    process_count,
    refuse_bad_outputs,
    single_driver,
    sweep_from,
)

__all__ = ["add_parser", "run"]

FIGURES = ("pm", "gm", "fc", "peak")


def span(text: str) -> tuple[float, float]:
    """An argparse type: LOW,HIGH factors of a value (0.1,10)."""
    parts = text.split(",")
    try:
        low, high = (float(p) for p in parts)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"expected LOW,HIGH factors such as 0.1,10, got {text!r}") from exc
    if not (0 < low < 1 < high):
        raise argparse.ArgumentTypeError(f"expected 0 < LOW < 1 < HIGH, got {text!r}")
    return low, high


def step(text: str) -> float:
    """An argparse type: the step h of ln x, in (0, 0.2]."""
    try:
        value = float(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"expected a step such as 0.01, got {text!r}") from exc
    if not 0 < value <= 0.2:
        raise argparse.ArgumentTypeError(f"expected a step in (0, 0.2] (a change of ln x), got {text!r}")
    return value


def positive(text: str) -> int:
    """An argparse type: a whole number, 1 or more."""
    try:
        value = int(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from exc
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected 1 or more, got {value}")
    return value


def add_parser(parser: argparse.ArgumentParser) -> None:
    parser.epilog = ("Slopes are local, and a solved value holds for this operating point and corner only: re-check the corners. "
                     "See README section 'What sets the margin, and what value fixes it'.")
    parser.add_argument("netlist", help="the netlist file (ngspice syntax); it is never modified")
    parser.add_argument("--at", type=node_name, required=True, metavar="NODE", help="the node where the loop is broken, as for `netloop check`")
    add_measure_options(parser)
    parser.add_argument("--knob", action="append", default=[], metavar="NAME",
                        help="a value to try: an element (cc, xa1.rz) or a transistor size (m6:w, xa1.m3:l; a wrapped process device's "
                             "xop.xm6:w) (repeatable; default: every one)")
    parser.add_argument("--solve", action="append", default=[], metavar="NAME",
                        help="with --require: the knob whose value is solved for (repeatable; default: the --top ranked ones)")
    parser.add_argument("--top", type=positive, default=3, metavar="N", help="with --require: solve for the N knobs that move the requirement's figure most (default 3)")
    parser.add_argument("--range", type=span, default=(0.1, 10.0), metavar="LOW,HIGH",
                        help="the factors of a knob's value a what-if searches (default 0.1,10)")
    parser.add_argument("--step", type=step, default=0.01, metavar="H",
                        help="each knob is simulated at x e^(+-H) and x e^(+-2H) (default 0.01: about +-1 %% and +-2 %%)")
    parser.add_argument("--rank-by", choices=FIGURES, metavar="FIGURE",
                        help="rank by the slope of pm, gm, fc or peak (default: the first requirement's figure, else pm)")
    parser.add_argument("--workers", type=process_count, metavar="N",
                        help="Dask worker processes that share the knobs (default: the measurement's own ngspice, "
                             "or the usable CPUs when the knobs would take longer than 20 s on it)")
    parser.add_argument("--json", action="store_true", help="print one JSON document (schema netloop.sensitivity/1) instead of the summary")
    parser.add_argument("--plot", metavar="FILE", help="write the ranking chart (FILE.png, .svg or .pdf)")
    parser.add_argument("--report", metavar="FILE", help="write a self-contained HTML report: the loop, then the ranking and the what-ifs")


def run(args: argparse.Namespace) -> int:
    from netloop.analysis import parse_requirements
    from netloop.cli.main import exit_status
    from netloop.errors import NetloopError
    from netloop.jobs.sensitivity import sensitivities

    requirements = parse_requirements(args.require)  # bad expressions fail before any simulation
    refuse_bad_outputs(args, plot="sensitivity chart")  # the words netloop.report.sensitivity_plot uses when writing it
    if args.open_loop_rhp_poles is not None and args.open_loop_rhp_poles < 0:
        raise NetloopError(f"--open-loop-rhp-poles must be 0 or more, got {args.open_loop_rhp_poles}")
    if args.solve and not requirements:
        raise NetloopError("--solve needs a requirement to solve for, e.g. --require 'pm>=60'")
    result = sensitivities(
        args.netlist, args.at, driver=single_driver(args.driver, args.at), method=args.method, sweep=sweep_from(args), open_loop_rhp_poles=args.open_loop_rhp_poles,
        requirements=requirements, knobs=args.knob, solve=args.solve, top=args.top, step=args.step, span=args.range,
        rank_by=args.rank_by, keep_decks=args.keep_decks, processes=args.processes, workers=args.workers,
    )
    if args.plot:
        from netloop.report.sensitivity_plot import plot_sensitivities

        plot_sensitivities(result, args.plot)
    if args.report:
        from netloop.report.sensitivity_html import write_sensitivity_html

        write_sensitivity_html(result, args.report)
    if args.json:
        from netloop.jobs.sensitivity.document import sensitivity_document

        print(json.dumps(sensitivity_document(result), indent=2, allow_nan=False))
    else:
        from netloop.report.sensitivity_text import format_sensitivity_text

        print(format_sensitivity_text(result), end="")
    return exit_status(result.verdict)
