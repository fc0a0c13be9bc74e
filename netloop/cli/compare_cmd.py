"""``netloop compare NETLIST --at A --at B``: break several locations in one deck and explain how their T differ.

Text: a table with one column per location (and method), then each difference explained, the
dominant closed-loop pole check and the warnings. ``--json`` prints
``netloop.report.multi_document("locations", ...)`` (schema "netloop.locations/1"): ``locations``,
one entry per location in the shape of ``check --json``, ``passed``, and

    differences   [{locations: [a, b], method, kind, max_relative_difference, explanation, loops}]
    pole_checks   [{locations, method, pole_a_rad_s: [re, im] | null, pole_b_rad_s, agree, explanation}]
    poles_agree   true | false | null (no two locations on one loop group, or no fitted poles)
    tolerances    {t_relative, pole_relative}

Exit status: 0 every location stable and every requirement met, 1 a location unstable or a requirement failed,
2 bad input or a simulator failure, 3 inconclusive (a location's self-check failed and none failed).
"""

from __future__ import annotations

import argparse
import json
import math
import re

from netloop.cli.check_cmd import add_measure_options, node_name, refuse_bad_outputs, sweep_from, write_outputs

__all__ = ["add_parser", "comparison_table", "run"]


def add_parser(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("netlist", help="the netlist file (ngspice syntax); it is never modified")
    parser.add_argument(
        "--at", type=node_name, action="append", default=[], required=True, metavar="NODE[=ELEMENT[.PIN],...]",
        help="a break location (repeat, at least twice); '=' names that location's driver terminals, decided from the circuit otherwise",
    )
    add_measure_options(parser, methods=("tian", "middlebrook", "both"), driver=False)  # drivers go with each --at
    parser.add_argument("--json", action="store_true", help="print one JSON document: locations (each as check --json), differences, poles_agree")
    parser.add_argument("--plot", metavar="FILE", help="write overlaid Bode and Nyquist plots (FILE.png, .svg or .pdf; the Nyquist plot gets a -nyquist suffix)")
    parser.add_argument("--csv", metavar="FILE", help="write the sampled return ratio of each location (FILE-LOCATION.csv, as check --csv)")
    parser.add_argument("--report", metavar="FILE", help="write one self-contained HTML report of every location")
    parser.epilog = ("Exit status: 0 every location stable and every requirement met, 1 a location unstable or a requirement failed, "
                     "2 bad input or a simulator failure, 3 inconclusive (a location's data supports no verdict).")


def _locations(specs: list[str]) -> tuple[list[str], dict[str, str]]:
    """["out", "o1=m2.d,m4.d"] -> (["out", "o1"], {"o1": "m2.d,m4.d"})."""
    from netloop.errors import NetloopError

    nodes, drivers = [], {}
    for spec in specs:
        node, eq, driver = spec.partition("=")
        node = node.strip()
        if not node or (eq and not driver.strip()):
            raise NetloopError(f"--at {spec!r}: expected NODE or NODE=ELEMENT[.PIN][,...]")
        nodes.append(node)
        if eq:
            drivers[node.lower()] = driver.strip()
    return nodes, drivers


def _cells(r) -> list[str]:
    from netloop.jobs.compare import dominant_pole
    from netloop.report.notation import db, deg, eng, number, ratio_db

    a = r.analysis
    m = a.margins
    pole = dominant_pole(r)
    return [
        db(a.dc_gain_db),
        ", ".join(eng(c.freq_hz, "Hz") for c in a.gain_crossovers) or "none",
        deg(m.phase_margin_deg),
        db(m.gain_margin_db),
        f"{number(m.modulus_margin)} ({db(ratio_db(m.modulus_margin))})",
        "-" if pole is None else f"{eng(abs(pole) / math.tau, 'Hz')}, damping {number(-pole.real / abs(pole), 2)}",
        {"pass": "PASS ", "fail": "FAIL ", "inconclusive": "INCONCLUSIVE "}[r.verdict] + a.classification,
    ]


_ROWS = ("DC loop gain", "gain crossovers", "phase margin", "gain margin", "modulus margin", "dominant pole", "verdict")


def comparison_table(comparison) -> str:
    """The side-by-side table: one column per location (and method), one row per figure."""
    heads = [r.label or r.breaks.node for r in comparison.results]
    columns = [_cells(r) for r in comparison.results]
    width0 = max(len(x) for x in _ROWS) + 2
    widths = [max(len(h), *(len(c) for c in col)) + 2 for h, col in zip(heads, columns)]
    lines = ["".ljust(width0) + "".join(h.ljust(w) for h, w in zip(heads, widths))]
    for i, name in enumerate(_ROWS):
        lines.append(name.ljust(width0) + "".join(col[i].ljust(w) for col, w in zip(columns, widths)))
    return "\n".join(line.rstrip() for line in lines)


def _difference_document(d) -> dict:
    return {
        "locations": list(d.locations),
        "method": d.method,
        "kind": d.kind,
        "max_relative_difference": d.max_relative_difference,
        "explanation": d.explanation,
        "loops": list(d.loops),
    }


def _pole_document(c) -> dict:
    def pair(p):
        return None if p is None else [p.real, p.imag]

    return {"locations": list(c.locations), "method": c.method, "pole_a_rad_s": pair(c.pole_a_rad_s),
            "pole_b_rad_s": pair(c.pole_b_rad_s), "agree": c.agree, "explanation": c.explanation}


def run(args: argparse.Namespace) -> int:
    from netloop import report
    from netloop.jobs.compare import POLE_RTOL, T_RTOL, compare
    from netloop.errors import NetloopError
    from netloop.jobs.measure import load_netlist

    from netloop.cli.check_cmd import requirements_from

    requirements = requirements_from(args.require)  # bad expressions fail before any simulation
    refuse_bad_outputs(args)
    if args.open_loop_rhp_poles is not None and args.open_loop_rhp_poles < 0:
        raise NetloopError(f"--open-loop-rhp-poles must be 0 or more, got {args.open_loop_rhp_poles}")
    nodes, drivers = _locations(args.at)
    netlist = load_netlist(args.netlist)
    result = compare(
        netlist, nodes, drivers=drivers, method=args.method, sweep=sweep_from(args), open_loop_rhp_poles=args.open_loop_rhp_poles,
        requirements=requirements, keep_decks=args.keep_decks, processes=args.processes,
    )
    if args.json:  # the results first: a file that cannot be written afterwards loses nothing
        doc = report.multi_document(
            "locations", result.results,
            differences=[_difference_document(d) for d in result.differences],
            pole_checks=[_pole_document(c) for c in result.pole_checks],
            poles_agree=result.poles_agree,
            tolerances={"t_relative": T_RTOL, "pole_relative": POLE_RTOL},
        )
        print(json.dumps(doc, indent=2, allow_nan=False))
    else:
        from netloop.cli.check_cmd import verdicts_line

        heads = [r.label or r.breaks.node for r in result.results]
        lines = [verdicts_line(result.verdict, dict(zip(heads, (r.verdict for r in result.results)))), "",
                 comparison_table(result), "", "differences"]
        lines += [f"  {d.locations[0]} / {d.locations[1]} ({d.method}): {d.explanation}" for d in result.differences]
        lines += ["", "closed-loop poles"]
        lines += [f"  {c.locations[0]} / {c.locations[1]} ({c.method}): {c.explanation}" for c in result.pole_checks] or ["  no two locations on one loop group"]
        if result.notes:
            lines += ["", "loop discovery", *(f"  {n}" for n in result.notes)]
        warnings = [f"  {r.label or r.breaks.node}: {w}" for r in result.results for w in r.warnings]
        if warnings:
            lines += ["", "warnings", *dict.fromkeys(warnings)]
        print("\n".join(lines))
    results = list(result.results)
    write_outputs(args, results, names=[re.sub(r"[^A-Za-z0-9.]+", "-", r.label or r.breaks.node).strip("-") for r in results])
    from netloop.cli.main import exit_status

    return exit_status(result.verdict)
