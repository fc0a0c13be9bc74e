"""``netloop inspect NETLIST``: what netloop reads in a netlist, after flattening."""

from __future__ import annotations

import argparse
import json
from collections.abc import Mapping

__all__ = ["add_parser", "inspect_summary", "run"]


def add_parser(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("netlist", help="the netlist file (ngspice syntax)")
    parser.add_argument("--json", action="store_true", help="print the summary as JSON")


def inspect_summary(path: str) -> dict:
    """Parse and flatten ``path``; the summary as plain data (what --json prints)."""
    from netloop.graph import flatten
    from netloop.netlist import parse_file

    netlist = parse_file(path)
    flat = flatten(netlist)
    warnings = list(netlist.warnings)
    warnings += [w for w in flat.warnings if not any(w.startswith(n) for n in netlist.warnings)]
    counts = flat.connection_counts()
    ground = set(flat.ground)
    lonely = [n for n, c in counts.items() if c == 1 and n not in ground]
    for n in lonely[:50]:
        warnings.append(f"node {n!r} has a single connection")
    if len(lonely) > 50:
        warnings.append(f"... and {len(lonely) - 50} more nodes with a single connection")
    return {
        "netlist": netlist.source,
        "title": netlist.title,
        "elements": len(flat),
        "nodes": flat.node_count,
        "by_kind": dict(flat.by_kind()),
        "subcircuits": dict(flat.instance_counts),
        "definitions": len(netlist.subcircuits),
        "files": list(netlist.files),
        "lib_sections": [{"file": f, "section": s} for f, s in netlist.lib_sections],
        "ignored": [{"statement": d.keyword, "where": f"{d.location.file}:{d.location.line}"} for d in netlist.ignored],
        "globals": list(netlist.globals),
        "warnings": warnings,
    }


def _text(summary: Mapping) -> str:
    lines = [f"netlist   {summary['netlist']}", f"title     {summary['title']}"]
    lines.append(f"elements  {summary['elements']} after flattening")
    lines.append(f"nodes     {summary['nodes']} (ground excluded)")
    if summary["by_kind"]:
        lines.append("by kind   " + ", ".join(f"{k} {n}" for k, n in summary["by_kind"].items()))
    if summary["subcircuits"]:
        lines.append("subcircuit instances")
        lines.extend(f"  {name:<32} {n}" for name, n in summary["subcircuits"].items())
    lines.append(f"files read ({len(summary['files'])})")
    lines.extend(f"  {f}" for f in summary["files"][:20])
    if len(summary["files"]) > 20:
        lines.append(f"  ... and {len(summary['files']) - 20} more")
    if summary["lib_sections"]:
        lines.append("library sections")
        lines.extend(f"  {s['file']} [{s['section']}]" for s in summary["lib_sections"])
    if summary["ignored"]:
        lines.append("set aside (never run by netloop)")
        lines.extend(f"  {d['where']}: {d['statement']}" for d in summary["ignored"])
    if summary["warnings"]:
        lines.append("warnings")
        lines.extend(f"  {w}" for w in summary["warnings"])
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    summary = inspect_summary(args.netlist)
    print(json.dumps(summary, indent=2) if args.json else _text(summary))
    return 0
