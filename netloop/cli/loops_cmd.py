"""``netloop loops NETLIST``: the feedback loop groups, their loops and the ranked break nodes, as text or JSON."""

from __future__ import annotations

import argparse
import json

__all__ = ["add_parser", "discovery_document", "format_discovery", "run"]


def add_parser(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("netlist", help="the netlist file (ngspice syntax); it is never modified")
    parser.add_argument("--json", action="store_true", help="print one JSON document instead of the text listing")
    parser.add_argument("--max-loops", type=int, default=None, metavar="N", help="loops listed per group at most (default 200)")
    parser.add_argument("--length-bound", type=int, default=None, metavar="N", help="nodes per loop at most, a passive network counting two (default 16)")
    parser.add_argument("--candidates", type=int, default=5, metavar="N", help="break candidates shown per group in the text listing (default 5; JSON lists all)")
    parser.add_argument("--split-checks", type=int, default=None, metavar="N",
                        help="candidates per group whose real probe split is worked out and stated (default 8; 0: loop structure only)")


def discovery_document(source: str, found) -> dict:
    """The plain-data form of a LoopDiscovery (what --json prints)."""
    groups = []
    for g in found.groups:
        groups.append({
            "index": g.index,
            "label": g.label,
            "nodes": list(g.nodes),
            "capped": g.capped,
            "loops": [
                {
                    "number": k,
                    "path": lp.describe(),
                    "nodes": list(lp.nodes),
                    "elements": list(lp.elements),
                    "steps": [{"from": s.source, "to": s.target, "elements": list(s.elements), "pins": list(s.pins), "passive": s.passive} for s in lp.steps],
                    "opened_by": list(lp.opened_by),
                    "active_steps": lp.active_steps,
                }
                for k, lp in enumerate(g.loops, 1)
            ],
            "candidates": [
                {
                    "rank": c.rank,
                    "node": c.node,
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
                for c in g.candidates
            ],
        })
    return {
        "schema": "netloop.loop-groups/1",
        "netlist": source,
        "signal_nodes": found.signal_nodes,
        "length_bound": found.length_bound,
        "max_loops": found.max_loops,
        "groups": groups,
        "notes": list(found.notes),
    }


TEXT_NODES = 24  # names listed in the text before the rest are counted (--json lists every one)
TEXT_STEPS = 16  # steps of a loop shown in the text


def _listed(names, most: int = TEXT_NODES) -> str:
    """``a, b, c`` or, for a long list, its first names and how many more."""
    if len(names) <= most:
        return ", ".join(names)
    return f"{len(names)} nodes: {', '.join(names[:most])}, ... and {len(names) - most} more (--json lists them all)"


def format_discovery(source: str, found, candidates: int = 5) -> str:
    """The text listing: each group, its loops, its best break nodes with the reason."""
    n = len(found.groups)
    lines = [f"{source}: {n} loop group{'s' if n != 1 else ''} among {found.signal_nodes} signal nodes"]
    if not n:
        lines.append("no signal path leads from a node back to itself without passing through ground or a supply")
    for g in found.groups:
        more = " (capped: more exist)" if g.capped else ""
        lines += ["", f"{g.label}: {len(g.loops)} loop{'s' if len(g.loops) != 1 else ''}{more} through {_listed(g.nodes)}"]
        lines += [f"  {g.index}.{k}  {lp.describe(TEXT_STEPS)}" for k, lp in enumerate(g.loops, 1)]
        lines.append("  break candidates:")
        for c in g.candidates[:candidates]:
            unchecked = "" if c.split_checked else " [loop structure only: the probe's split here was not worked out (--split-checks)]"
            lines.append(f"    {c.rank}. {c.node}: {c.reason}{unchecked}")
        if len(g.candidates) > candidates:
            lines.append(f"    ... {len(g.candidates) - candidates} more (--candidates N, or --json)")
    lines += [f"note: {t}" for t in found.notes]
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    from netloop.jobs.discover import discover_loops
    from netloop.errors import NetloopError
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
    netlist = load_netlist(args.netlist)
    found = discover_loops(netlist, **bounds)
    if args.json:
        print(json.dumps(discovery_document(netlist.source, found), indent=2))
    else:
        print(format_discovery(netlist.source, found, args.candidates))
    return 0
