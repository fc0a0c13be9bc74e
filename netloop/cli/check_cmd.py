"""``netloop check NETLIST --at NODE``: measure one loop (or every loop) and report its stability."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

__all__ = ["add_parser", "run"]


def frequency(text: str) -> float:
    """An argparse type: a frequency in Hz as an engineer writes it (1k, 10meg, 100MHz; netloop.analysis.quantities)."""
    from netloop.analysis.quantities import parse_quantity
    from netloop.errors import PlanError

    try:
        value = parse_quantity(text, "hz")
    except PlanError as exc:  # argparse turns ArgumentTypeError into a usage message naming the option
        raise argparse.ArgumentTypeError(str(exc)) from exc
    if not value > 0:
        raise argparse.ArgumentTypeError(f"a frequency must be positive, got {text!r}")
    return value


def requirements_from(texts: list[str]):
    """The --require expressions parsed; a bare metric name (what the shell leaves of an unquoted pm>=60, having
    read '>' as a redirection) gets a hint to quote the expression."""
    import re

    from netloop.analysis import parse_requirements
    from netloop.analysis.requirements import METRICS
    from netloop.errors import PlanError

    for text in texts:
        if re.fullmatch(r"\s*[A-Za-z]+\s*", text) and text.strip().lower() in METRICS:
            raise PlanError(f"--require {text!r} has no operator and value; quote the whole expression, as in "
                            f"--require '{text.strip()}>=60': unquoted, the shell reads > as a redirection (and may have "
                            "written a file named after the rest)")
    return parse_requirements(texts)


def node_name(text: str) -> str:
    """An argparse type: a node to break at; an empty name (--at '', an unset shell variable) is refused, never read as
    "every loop" (which is what leaving --at out means for check)."""
    if not text.strip():
        raise argparse.ArgumentTypeError("an empty node name; name the node to break, as in --at out")
    return text


def process_count(text: str) -> int:
    """An argparse type: a number of processes, 1 or more."""
    try:
        n = int(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"expected a whole number of processes, got {text!r}") from exc
    if n < 1:
        raise argparse.ArgumentTypeError(f"expected 1 or more processes, got {n}")
    return n


def add_measure_options(parser: argparse.ArgumentParser, methods: tuple[str, ...] = ("tian", "middlebrook"), driver: bool = True) -> None:
    """The options every measuring command shares (check, compare, demo); ``methods`` are the --method choices, ``driver`` adds --driver."""
    if driver:
        parser.add_argument("--driver", action="append", metavar="[NODE=]ELEMENT[.PIN],...",
                            help="the element terminal(s) that drive the break node (comma-separated; hierarchical names like "
                                 "x1.x2.m3.d allowed); with --at-pair give one per node, NODE=ELEMENT[.PIN],...; decided from the circuit by default")
    parser.add_argument("--method", choices=methods, default="tian", help="how T is formed from the two runs (default: tian)")
    parser.add_argument("--fmin", type=frequency, metavar="HZ", help="lowest frequency, e.g. 1k or 10MHz (default 10 mHz, widened when the phase has not settled)")
    parser.add_argument("--fmax", type=frequency, metavar="HZ", help="highest frequency, e.g. 100meg or 1GHz (default 10 GHz, widened until |T| << 1)")
    parser.add_argument("--ppd", type=int, default=10, metavar="N", help="points per decade of the first sweep; crossovers are refined adaptively (default 10)")
    parser.add_argument("--open-loop-rhp-poles", type=int, default=None, metavar="P",
                        help="open-loop right-half-plane poles for the Nyquist verdict (default: read from the data, by a rational fit of T)")
    parser.add_argument("--require", action="append", default=[], metavar="EXPR", help="a requirement such as 'pm>=60', 'gm>=10dB', 'fc>=100MHz', 'dc>=40' (repeatable; quote it for the shell)")
    parser.add_argument("--keep-decks", metavar="DIR", help="keep the ngspice decks netloop writes in DIR")
    parser.add_argument("--processes", type=process_count, metavar="N", help="ngspice processes that run the excitations side by side "
                        "(default: one per excitation, up to the free CPUs and at most 4, on netlists of 30000 elements or more; else 1)")
    parser.add_argument("--jobs", dest="processes", type=process_count, help=argparse.SUPPRESS)  # the earlier name of --processes


def add_parser(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("netlist", help="the netlist file (ngspice syntax); it is never modified")
    parser.add_argument("--at", type=node_name, metavar="NODE", help="the node where the loop is broken (hierarchical names like xamp.n5 allowed); every loop when omitted")
    parser.add_argument("--at-pair", type=node_name, metavar="P,N", help="break a fully differential node pair and report its differential- and common-mode loops")
    add_measure_options(parser)
    parser.add_argument("--json", action="store_true", help="print one JSON document instead of the text summary")
    parser.add_argument("--csv", metavar="FILE", help="write the sampled return ratio as CSV")
    parser.add_argument("--plot", metavar="FILE", help="write Bode and Nyquist plots (FILE.png, .svg or .pdf; the Nyquist plot gets a -nyquist suffix)")
    parser.add_argument("--report", metavar="FILE", help="write a self-contained HTML report")
    parser.add_argument("--seed", type=seed_number, metavar="N",
                        help="ngspice's random seed: the netlist's agauss/gauss values (a process's mismatch models) are drawn as for "
                             "the sample with seed N of 'netloop yield' (netloop's copy of the netlist starts with .option seed=N)")


def seed_number(text: str) -> int:
    """An argparse type: ngspice's random seed, a whole number from 1 to 2**31 - 1."""
    from netloop.jobs.statistics.plan import MAX_SEED

    try:
        n = int(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from exc
    if not 1 <= n <= MAX_SEED:
        raise argparse.ArgumentTypeError(f"a seed is from 1 to {MAX_SEED}, got {n}")
    return n


def sweep_from(args: argparse.Namespace):
    from netloop.jobs.measure import Sweep

    kwargs = {"points_per_decade": args.ppd}
    if args.fmin is not None:
        kwargs.update(fmin_hz=args.fmin, fmin_given=True)
    if args.fmax is not None:
        kwargs.update(fmax_hz=args.fmax, fmax_given=True)
    if args.fmin is not None and args.fmax is None and args.fmin >= 1e10:
        kwargs["fmax_hz"] = args.fmin * 1e3
    if args.fmax is not None and args.fmin is None and args.fmax <= 1e-2:
        kwargs["fmin_hz"] = args.fmax * 1e-3
    return Sweep(**kwargs)


def refuse_bad_outputs(args: argparse.Namespace, plot: str = "Bode plot") -> None:
    """OutputError before any simulation for a --csv, --plot, --report or --keep-decks path that cannot be written;
    ``plot`` names what the command's --plot writes (sensitivity's is its ranking chart, not a Bode plot)."""
    outputs = [(option, what) for option, what in (("csv", "CSV samples"), ("plot", plot), ("report", "HTML report"))
               if getattr(args, option, None)]
    if outputs:  # the report stage loads only when a file is asked for (else while ngspice runs: check's load_also)
        from netloop.report.figure import file_format
        from netloop.report.files import refuse_unwritable

        if getattr(args, "plot", None):
            file_format(args.plot)
        for option, what in outputs:
            refuse_unwritable(getattr(args, option, None), what)
    keep = getattr(args, "keep_decks", None)
    if keep and Path(keep).exists() and not Path(keep).is_dir():
        from netloop.errors import OutputError

        raise OutputError(f"cannot keep the decks in {keep!r}: it is a file, not a folder")


def write_outputs(args: argparse.Namespace, results, names: list[str] | None = None) -> None:
    """The files asked for with --csv, --plot and --report (one loop or several; several CSV files get each loop's
    name, ``names`` or its break node, before the extension). Called after the results are printed, so that a file
    that cannot be written (exit status 2) loses no result."""
    from netloop import report
    from netloop.report.files import tagged_path

    sys.stdout.flush()  # the printed results reach the terminal before any error about a file
    single = results[0] if len(results) == 1 else None
    if getattr(args, "csv", None):
        if single is not None:
            report.write_csv(single, args.csv)
        else:
            for r, name in zip(results, names or [r.breaks.node for r in results]):
                report.write_csv(r, tagged_path(args.csv, name))
    if getattr(args, "plot", None):
        report.plot_bode(single if single is not None else results, args.plot)
        report.plot_nyquist(single if single is not None else results, tagged_path(args.plot, "nyquist"))
    if getattr(args, "report", None):
        report.write_html(single if single is not None else results, args.report)


def _driver_spec(text: str) -> tuple[str | None, str]:
    """"NODE=ELEMENT[.PIN],..." -> (node, spec); "ELEMENT[.PIN],..." -> (None, spec)."""
    node, eq, spec = text.partition("=")
    if not eq:
        return None, text.strip()
    if not node.strip() or not spec.strip():
        from netloop.errors import NetloopError

        raise NetloopError(f"--driver {text!r}: expected ELEMENT[.PIN],... or NODE=ELEMENT[.PIN],...")
    return node.strip().lower(), spec.strip()


def single_driver(values: list[str] | None, at: str | None) -> str | None:
    """The one --driver of a single break (NODE= may prefix it and must then name the --at node)."""
    from netloop.errors import NetloopError

    if not values:
        return None
    if len(values) > 1:
        raise NetloopError("--driver is given once for a single break (several terminals go in one comma-separated list)")
    node, spec = _driver_spec(values[0])
    if node is not None and at is not None and node != at.strip().lower():
        raise NetloopError(f"--driver {values[0]!r} names node {node}, but the break is at {at}")
    return spec


def pair_drivers(values: list[str] | None, nodes: tuple[str, str]) -> tuple[str | None, str | None]:
    """The --driver NODE=ELEMENT[.PIN],... of each node of --at-pair (None for a node not named: decided)."""
    from netloop.errors import NetloopError

    out: dict[str, str] = {}
    for value in values or ():
        node, spec = _driver_spec(value)
        if node is None or node not in nodes:
            raise NetloopError(f"--driver {value!r}: with --at-pair {','.join(nodes)} each driver names its node: "
                               f"--driver {nodes[0]}=ELEMENT[.PIN],... --driver {nodes[1]}=ELEMENT[.PIN],...")
        if node in out:
            raise NetloopError(f"--driver names node {node} twice; put its terminals in one comma-separated list")
        out[node] = spec
    return out.get(nodes[0]), out.get(nodes[1])


def run(args: argparse.Namespace) -> int:
    from netloop.jobs.early import ngspice_started_early

    with ngspice_started_early(args.netlist):  # ngspice starts, and reads the model libraries, while netloop's own modules load and the netlist is read
        return _run(args)


def _run(args: argparse.Namespace) -> int:
    from netloop.analysis.preload import load_also
    from netloop.cli.main import exit_status
    from netloop.jobs.measure import load_netlist, measure

    load_also("netloop.report")  # imported while ngspice reads the netlist, not before the netlist is sent to it

    requirements = requirements_from(args.require)  # bad expressions fail before any simulation
    refuse_bad_outputs(args)
    if args.open_loop_rhp_poles is not None and args.open_loop_rhp_poles < 0:
        from netloop.errors import NetloopError

        raise NetloopError(f"--open-loop-rhp-poles must be 0 or more, got {args.open_loop_rhp_poles}")
    common = dict(
        driver=single_driver(args.driver, args.at) if not args.at_pair else args.driver,
        method=args.method,
        sweep=sweep_from(args),
        open_loop_rhp_poles=args.open_loop_rhp_poles,
        requirements=requirements,
        keep_decks=args.keep_decks,
        processes=args.processes,
    )
    source = args.netlist if args.seed is None else seeded(args.netlist, args.seed)
    if args.at_pair:
        return run_pair(args, load_netlist(source), common)
    if not args.at:
        return run_groups(args, load_netlist(source), common)
    results = [measure(source, args.at, **common)]  # measure reads the file while ngspice starts
    from netloop import report

    if args.json:  # the result first: a file that cannot be written afterwards loses nothing
        print(json.dumps(report.to_document(results[0]), indent=2, allow_nan=False))
    else:
        print(report.format_text(results[0]))
    write_outputs(args, results)
    return exit_status(results[0].verdict)


def seeded(path: str, seed: int):
    """The netlist at ``path`` as a sample with ``seed`` reads it (netloop.jobs.statistics.seeded_netlist)."""
    from netloop.jobs.statistics import seeded_netlist

    return seeded_netlist(path, seed)


def unmeasured_text(group) -> str:
    """The summary of a loop group no break could measure: INCONCLUSIVE first, the reason, what to try."""
    return f"INCONCLUSIVE  {group.label}: not measured: {group.reason}\ntry: {group.advice}"


def run_groups(args: argparse.Namespace, netlist, common: dict) -> int:
    """Without --at: every loop group measured on its own (netloop.jobs.discover.check_loops), each reported, the verdicts combined."""
    from netloop import report
    from netloop.cli.main import exit_status
    from netloop.jobs.discover import check_loops

    check = check_loops(netlist, **common)
    for note in check.notes:
        print(f"netloop: {note}", file=sys.stderr)
    results = list(check.results)
    if args.json:  # the results first: a file that cannot be written afterwards loses nothing
        print(json.dumps(report.groups_document(check), indent=2, allow_nan=False))
    else:
        shared = netlist.warnings if len(check.groups) > 1 else ()  # the netlist's own: said once, not under every loop
        parts = [report.format_text(without_warnings(g.result, shared)) if g.result is not None else unmeasured_text(g)
                 for g in check.groups]
        if len(check.groups) > 1:
            head = verdicts_line(check.verdict, {g.label: g.verdict for g in check.groups})
            said = [w for w in shared if any(g.result is not None and w in g.result.warnings for g in check.groups)]
            parts.insert(0, head + "".join(f"\n  - {w}" for w in said))
        print("\n\n".join(parts))
    if results:
        write_outputs(args, results)
    return exit_status(check.verdict)


def without_warnings(result, shared):
    """``result`` with the warnings in ``shared`` left out (said once above several loops' summaries)."""
    from dataclasses import replace

    return replace(result, warnings=tuple(w for w in result.warnings if w not in shared)) if shared else result


def verdicts_line(verdict: str, parts: dict[str, str]) -> str:
    """The first line over several loops: "INCONCLUSIVE  differential mode: pass, common mode: inconclusive"."""
    return f"{verdict.upper()}  " + ", ".join(f"{name}: {v}" for name, v in parts.items())


def coupling_document(coupling) -> dict:
    """The coupling figures of a node pair as plain data (dB; -inf written as null by the document)."""
    return {
        "dm_to_cm_db": coupling.dm_to_cm_db,
        "cm_to_dm_db": coupling.cm_to_dm_db,
        "dm_band_hz": coupling.dm_band_hz,
        "cm_band_hz": coupling.cm_band_hz,
        "threshold_db": coupling.threshold_db,
        "coupled": coupling.coupled,
        "unjudged": coupling.unjudged or None,
    }


def coupling_line(coupling) -> str:
    """One line: both coupling figures, their bands and whether they pass the threshold."""
    from netloop.report.notation import db, eng

    if coupling.unjudged:
        return f"coupling  not judged: {coupling.unjudged}"
    word = "COUPLED" if coupling.coupled else "negligible"
    return (f"coupling  {word}: DM->CM {db(coupling.dm_to_cm_db)} up to {eng(coupling.dm_band_hz, 'Hz')}, "
            f"CM->DM {db(coupling.cm_to_dm_db)} up to {eng(coupling.cm_band_hz, 'Hz')} (threshold {db(coupling.threshold_db)})")


def pair_driver_words(text: str, nodes: tuple[str, str]) -> str:
    """A probe message about one node of a pair in this command line's words: driver=... becomes --driver NODE=..."""
    import re

    for node in nodes:
        if f"at {node}:" in text or f"node {node}" in text:
            text = text.replace("driver=ELEMENT[.PIN]", f"--driver {node}=ELEMENT[.PIN]").replace("use driver=", f"use --driver {node}=")
            text = re.sub(r"\bdriver='([^']*)'", lambda m: f"--driver {node}={m.group(1)}", text)
    return text


def run_pair(args: argparse.Namespace, netlist, common: dict) -> int:
    """--at-pair P,N: both loops of a differential pair, text or one JSON document with a part per mode."""
    from netloop import report
    from netloop.cli.main import exit_status
    from netloop.errors import NetloopError, ProbeError
    from netloop.jobs.measure_pair import measure_pair, parse_pair

    if args.at:
        raise NetloopError("give either --at NODE or --at-pair P,N, not both")
    nodes = parse_pair(args.at_pair)
    drivers = pair_drivers(common.pop("driver"), nodes)
    try:
        pair = measure_pair(netlist, nodes, drivers=drivers, **common)
    except ProbeError as exc:  # say how to name a driver on this command line
        raise ProbeError(pair_driver_words(str(exc), nodes)) from exc
    if args.json:  # the results first: a file that cannot be written afterwards loses nothing
        doc = report.multi_document("modes", pair.modes, coupling=coupling_document(pair.coupling))
        print(json.dumps(doc, indent=2, allow_nan=False))
    else:
        print(verdicts_line(pair.verdict, {f"{mode} mode": r.verdict for mode, r in pair.modes.items()}))
        parts = [f"{mode} mode\n{report.format_text(r)}" for mode, r in pair.modes.items()]
        print("\n".join(parts) + "\n" + coupling_line(pair.coupling))
    write_outputs(args, list(pair.modes.values()), names=list(pair.modes))
    return exit_status(pair.verdict)
