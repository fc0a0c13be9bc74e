"""Every loop of a netlist, composed: flatten, find the loop groups, break each at its best node and measure it."""

from __future__ import annotations

from dataclasses import replace
from os import PathLike

import numpy as np

from netloop.errors import ProbeError
from netloop.graph import LoopDiscovery, LoopGroup, find_loops, flatten
from netloop.graph.loops import DEFAULT_LENGTH_BOUND, DEFAULT_MAX_LOOPS
from netloop.loop_result import LoopResult
from netloop.measure import load_netlist, measure
from netloop.netlist import Netlist

__all__ = ["discover_loops", "measure_all_loops", "opened_circuit_rhp_poles"]


def discover_loops(
    netlist: Netlist | str | PathLike[str], *, length_bound: int = DEFAULT_LENGTH_BOUND, max_loops: int = DEFAULT_MAX_LOOPS
) -> LoopDiscovery:
    """The loop groups of a netlist (a parsed Netlist, a path or netlist text), their loops and ranked break nodes."""
    return find_loops(flatten(load_netlist(netlist)), length_bound=length_bound, max_loops=max_loops)


def opened_circuit_rhp_poles(result: LoopResult) -> int | None:
    """Right-half-plane poles of the measured T itself (the opened circuit's own instability), or None if unknown.

    Fits T with the same AAA fit the analysis uses for 1/(1+T), by handing it T' = 1/T - 1
    (so that 1/(1+T') = T): the poles it reports are then the poles of T.
    """
    from netloop.analysis.poles import closed_loop_poles

    f, t = result.analysis.freq_hz, result.analysis.t
    with np.errstate(divide="ignore", invalid="ignore"):
        shifted = 1.0 / t - 1.0
    if f.size < 4 or not np.all(np.isfinite(shifted)):
        return None
    fit, _ = closed_loop_poles(f, shifted, 0)
    return None if fit is None else fit.rhp_count


def _closed_note(group: LoopGroup, node: str, left: tuple[int, ...]) -> str:
    shown = "; ".join(f"loop {group.index}.{k}: {group.loops[k - 1].describe()}" for k in left[:3])
    more = f" and {len(left) - 3} more" if len(left) > 3 else ""
    return (f"loop {group.index}: breaking {node} leaves {len(left)} of its loops closed ({shown}{more}); "
            "the opened circuit may itself be unstable, so P (its right-half-plane poles) may be nonzero: read the Nyquist count with care")


def _measure_group(parsed: Netlist, group: LoopGroup, options: dict, notes: list[str]) -> LoopResult:
    tried = []
    for cand in group.candidates:
        label = f"loop {group.index} ({cand.node})"
        try:
            result = measure(parsed, cand.node, label=label, **options)
        except ProbeError as exc:
            tried.append(f"{cand.node} ({exc})")
            continue
        if tried:
            notes.append(f"loop {group.index}: could not break at {'; '.join(tried)}; fell back to rank {cand.rank}")
        notes.append(f"loop {group.index}: broken at {cand.node}: {cand.reason}")
        if cand.left_closed:
            closed = _closed_note(group, cand.node, cand.left_closed)
            notes.append(closed)
            extra = [closed]
            rhp = opened_circuit_rhp_poles(result)
            if rhp:
                extra.append(f"a rational fit of the measured T has {rhp} right-half-plane pole(s): the opened circuit looks unstable by itself; "
                             f"if so, rerun with --open-loop-rhp-poles {rhp}")
                notes.append(f"loop {group.index}: {extra[-1]}")
            poles = result.analysis.poles
            if poles is not None and not poles.agrees_with_nyquist:
                extra.append("the closed-loop poles fitted from 1/(1+T) disagree with the Nyquist count made with P = "
                             f"{result.analysis.nyquist.open_loop_rhp_poles}: another sign that P is not what was assumed")
            result = replace(result, warnings=tuple(dict.fromkeys((*result.warnings, *extra))))
        return result
    raise ProbeError(f"loop {group.index}: no node of the group could be broken: {'; '.join(tried)}")


def measure_all_loops(netlist: Netlist | str | PathLike[str], **measure_options) -> tuple[list[LoopResult], list[str]]:
    """Break each independent loop group at its best node and measure it; returns (results, notes).

    ``measure_options`` are those of netloop.measure.measure (except ``at`` and ``label``); one
    simulator is started for all loops unless one is given. Each result is labelled
    ``loop K (NODE)``; the notes say which node was chosen for which group and why, and which
    loops a break leaves closed. Raises ProbeError when the netlist has no loop.
    """
    parsed = load_netlist(netlist)
    options = {k: v for k, v in measure_options.items() if k not in ("at", "label")}
    found = find_loops(flatten(parsed))
    notes = list(found.notes)
    if not found.groups:
        raise ProbeError(f"no feedback loop found in {parsed.source}: no signal path leads from a node back to itself "
                         "without passing through ground or a supply; name a node with --at to break it anyway")
    if options.get("driver") is not None and len(found.groups) > 1:
        raise ProbeError(f"--driver names one break's driver, but {parsed.source} has {len(found.groups)} loop groups; give --at too")
    if options.get("driver") is None:
        options.pop("driver", None)
    own = options.get("simulator") is None
    if own:
        from netloop.sim import default_simulator

        keep = options.pop("keep_decks", None)
        options["simulator"] = default_simulator(keep_dir=str(keep) if keep else None)
    try:
        results = [_measure_group(parsed, g, options, notes) for g in found.groups]
    finally:
        if own and hasattr(options["simulator"], "close"):
            options["simulator"].close()
    return results, notes
