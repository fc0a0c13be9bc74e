"""``netloop loops NETLIST``: the loop census: each loop group, the break chosen for it and why, counted in text, whole in JSON."""

from __future__ import annotations

import argparse
import json
import math

__all__ = ["add_parser", "census_document", "discovery_document", "format_census", "run"]


def add_parser(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("netlist", help="the netlist file (ngspice syntax); it is never modified")
    parser.add_argument("--json", action="store_true", help="print one JSON document (every loop, node, candidate and coarse figure)")
    parser.add_argument("--no-sweep", action="store_true",
                        help="do not measure the candidate breaks with a coarse sweep (no ngspice; the choice follows the loop structure)")
    parser.add_argument("--max-loops", type=int, default=None, metavar="N", help="loops listed per group at most (default 200)")
    parser.add_argument("--length-bound", type=int, default=None, metavar="N", help="nodes per loop at most, a passive network counting two (default 16)")
    parser.add_argument("--candidates", type=int, default=0, metavar="N",
                        help="also list the best N break candidates of each group with their reasons (default 0; JSON lists all)")
    parser.add_argument("--split-checks", type=int, default=None, metavar="N",
                        help="candidates per group whose real probe split is worked out and stated (default 8; 0: loop structure only)")


def _loop_document(k: int, lp) -> dict:
    return {
        "number": k,
        "path": lp.describe(),
        "nodes": list(lp.nodes),
        "passes": list(lp.passes),
        "elements": list(lp.elements),
        "steps": [{"from": s.source, "to": s.target, "elements": list(s.elements), "pins": list(s.pins), "passive": s.passive,
                   "through": list(s.through)} for s in lp.steps],
        "opened_by": list(lp.opened_by),
        "active_steps": lp.active_steps,
    }


def _candidate_document(c) -> dict:
    return {
        "rank": c.rank,
        "node": c.node,
        "at": c.break_name,
        "split_checked": c.split_checked,
        "driver_side": list(c.driver_side),
        "load_side": list(c.load_side),
        "refused": c.refused,
        "opens_all": c.opens_all,
        "opened": list(c.opened),
        "left_closed": list(c.left_closed),
        "kept_closed": list(c.kept_closed),
        "drivers": list(c.drivers),
        "loads": list(c.loads),
        "single_driver": c.single_driver,
        "high_impedance_load": c.high_impedance_load,
        "low_impedance_driver": c.low_impedance_driver,
        "reason": c.reason,
    }


def _group_document(g) -> dict:
    return {
        "index": g.index,
        "label": g.label,
        "nodes": list(g.nodes),
        "looked_through": list(g.looked_through),
        "merged": [list(m) for m in g.merged],
        "capped": g.capped,
        "loops": [_loop_document(k, lp) for k, lp in enumerate(g.loops, 1)],
        "candidates": [_candidate_document(c) for c in g.candidates],
    }


def discovery_document(source: str, found) -> dict:
    """The plain-data form of a LoopDiscovery (loop structure and probe splits, no measurement)."""
    return {
        "schema": "netloop.loop-groups/1",
        "netlist": source,
        "signal_nodes": found.signal_nodes,
        "length_bound": found.length_bound,
        "max_loops": found.max_loops,
        "groups": [_group_document(g) for g in found.groups],
        "notes": list(found.notes),
    }


def _finite(x: float | None) -> float | None:
    return x if x is not None and math.isfinite(x) else None


def census_document(census) -> dict:
    """The plain-data form of a Census (what --json prints): the discovery, and per group its coarse figures and chosen break."""
    doc = discovery_document(census.source, census.discovery)
    doc["swept"] = census.swept
    for entry, gc in zip(doc["groups"], census.groups):
        entry["chosen"] = gc.chosen
        entry["why"] = gc.why
        entry["can_ring"] = gc.can_ring
        entry["passed_over"] = list(gc.passed_over)  # "node (why)"
        entry["pair"] = list(gc.pair) if gc.pair else None  # a mirror pair: check measures both modes there
        entry["coarse"] = [{"node": c.node, "dc_db": _finite(c.dc_db), "peak_db": _finite(c.peak_db), "peak_hz": c.peak_hz,
                            "unity_hz": c.unity_hz, "top_db": _finite(c.top_db), "negligible": c.negligible, "falls": c.falls,
                            "error": c.error} for c in gc.coarse]
    return doc


_REASON = 160  # characters of a refusal shown in the text (--json has it whole)


def _short(text: str, most: int = _REASON) -> str:
    return text if len(text) <= most else text[: most - 3].rstrip() + "..."


def _plural(n: int, word: str) -> str:
    return f"{n} {word}{'' if n == 1 else 's'}"


def _group_line(gc) -> str:
    g = gc.group
    counts = f"{_plural(len(g.loops), 'loop')}{' (capped)' if g.capped else ''}, {_plural(len(g.nodes), 'node')}"
    measured = sum(1 for c in gc.coarse if c.measured)
    if measured:
        counts += f", {measured} of {len(g.candidates)} candidate breaks swept"
    if gc.chosen is None:
        return f"  loop {g.index}: {counts}; no break: {_short(gc.why, 2 * _REASON)}"
    over = f"; passed over {'; '.join(gc.passed_over_briefly)}" if gc.passed_over_briefly else ""
    pair = (f"; fully differential: {gc.pair[0]} and {gc.pair[1]} are mirror images, where `netloop check` measures both "
            f"modes (--at-pair {','.join(gc.pair)})" if gc.pair else "")
    return f"  {g.label}: {counts}; break at {gc.chosen}: {gc.why}{over}{pair}"


def format_census(census, candidates: int = 0) -> str:
    """The census in one screen: one line per group (can ring first), its break and why, and counts; lists only in --json."""
    found = census.discovery
    n = len(found.groups)
    lines = [f"{census.source}: {_plural(n, 'loop group')} among {found.signal_nodes} signal nodes"]
    if not n:
        lines.append("no signal path leads from a node back to itself without passing through ground or a supply")
        return "\n".join(lines)
    inner = sorted({x for g in found.groups for x in g.looked_through})
    merged = [m for g in found.groups for m in g.merged]
    elementary = sum(len(g.loops) for g in found.groups)
    collapsed = [f"{_plural(elementary, 'loop')} in all"]
    if inner:
        collapsed.append(f"{_plural(len(inner), 'node')} looked through inside stages (mirror inputs, pair tails)")
    if merged:
        collapsed.append(f"{sum(len(m) for m in merged)} nodes joined by 0 V sources into {_plural(len(merged), 'loop node')}")
    lines.append("counted as a designer reads the circuit: " + "; ".join(collapsed))
    sections = [("can ring (|T| above 0 dB at a break):", [gc for gc in census.groups if gc.chosen and gc.can_ring]),
                ("cannot ring on its own (|T| below 0 dB at every break swept):", [gc for gc in census.groups if gc.chosen and gc.can_ring is False]),
                ("not swept:" if census.swept else "loop groups (the choice follows the loop structure; no coarse sweep):",
                 [gc for gc in census.groups if gc.chosen and gc.can_ring is None]),
                ("no break measures these (check reports them as inconclusive):", [gc for gc in census.groups if not gc.chosen])]
    for title, members in sections:
        if members:
            lines.append(title)
            for gc in members:
                lines.append(_group_line(gc))
                for c in gc.group.candidates[:candidates]:
                    lines.append(f"      {c.rank}. {c.node}: {c.reason}")
    lines += [f"note: {t}" for t in census.notes]
    lines.append("--json lists every loop, node, candidate and coarse figure; `netloop check NETLIST` measures each group at its break")
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    from netloop.errors import NetloopError
    from netloop.jobs.discover import take_census
    from netloop.jobs.measure import load_netlist

    bounds = {}
    if args.max_loops is not None:
        if args.max_loops < 1:
            raise NetloopError(f"--max-loops must be at least 1, got {args.max_loops}")
        bounds["max_loops"] = args.max_loops
    if args.length_bound is not None:
        if args.length_bound < 2:
            raise NetloopError(f"--length-bound must be at least 2, got {args.length_bound}")
        bounds["length_bound"] = args.length_bound
    if args.split_checks is not None:
        if args.split_checks < 0:
            raise NetloopError(f"--split-checks must be at least 0, got {args.split_checks}")
        bounds["split_checks"] = args.split_checks
    if args.candidates < 0:
        raise NetloopError(f"--candidates must be at least 0, got {args.candidates}")
    netlist = load_netlist(args.netlist)
    census = take_census(netlist, sweep=not args.no_sweep and bounds.get("split_checks", 1) > 0, **bounds)
    if args.json:
        print(json.dumps(census_document(census), indent=2, allow_nan=False))
    else:
        print(format_census(census, args.candidates))
    return 0
