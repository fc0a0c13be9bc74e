"""Every loop of a netlist, composed: flatten, find the loop groups, state each break from the probe's real split, measure."""

from __future__ import annotations

import logging
from dataclasses import replace
from os import PathLike

import numpy as np

from netloop.errors import NetloopError, ProbeError
from netloop.graph import FlatCircuit, LoopDiscovery, LoopGroup, find_loops, flatten
from netloop.graph.loops import DEFAULT_LENGTH_BOUND, DEFAULT_MAX_LOOPS
from netloop.graph.split_effects import NodeSplit, apply_splits
from netloop.jobs.loop_result import LoopResult
from netloop.jobs.measure import CLEARS_STATUS, load_netlist, measure, own_simulator
from netloop.netlist import Netlist
from netloop.netlist.model import Element
from netloop.probe.breaking import locate_split
from netloop.probe.scope import Scope, child_scope, elements_of
from netloop.probe.sides import ac_ground_nodes

__all__ = ["DEFAULT_SPLIT_CHECKS", "discover_loops", "measure_all_loops", "node_split", "opened_circuit_rhp_poles", "probe_splits"]

DEFAULT_SPLIT_CHECKS = 8  # candidates per group (in structural order) whose real split is asked of the probe


def _flat_terminals(netlist: Netlist, circuit: FlatCircuit, index: dict[str, int], scope: Scope, e: Element, slot: int, globals_, depth: int = 0):
    """The flattened (element, pin) terminals behind one terminal of the probe (an X pin stands for every terminal inside on that pin's net)."""
    label = scope.label(e)
    at = index.get(label)
    if at is not None:  # a primitive, or a device wrapper that flattening keeps as one device
        pins = circuit.element_pins[at]
        return [(label, pins[slot])] if slot < len(pins) else []
    child = child_scope(netlist, scope, e, globals_) if e.kind == "X" and depth < 64 else None
    if child is None:
        return []
    inner_net = child.definitions[-1].pins[slot]
    out = []
    for inner in elements_of(netlist, child):
        for k, n in enumerate(inner.nodes):
            if n == inner_net:
                out.extend(_flat_terminals(netlist, circuit, index, child, inner, k, globals_, depth + 1))
    return out


def node_split(netlist: Netlist, circuit: FlatCircuit, node: str, *, driver: str | None = None,
               ac_ground: frozenset[str] | None = None, index: dict[str, int] | None = None) -> NodeSplit:
    """How netloop.probe.break_loop would split ``node`` (same side decision, no netlist built), or why it refuses.

    ``circuit`` is ``flatten(netlist)``; each probe terminal is mapped to the flattened terminals it
    stands for. ``ac_ground`` (netloop.probe.sides.ac_ground_nodes) and ``index`` (element name ->
    position in ``circuit``) may be given to save a pass over the circuit.
    """
    globals_ = frozenset(netlist.globals)
    if index is None:
        index = {n: i for i, n in enumerate(circuit.names)}
    if ac_ground is None:
        ac_ground = ac_ground_nodes(netlist, globals_)
    try:
        scope, _, split = locate_split(netlist, node, driver=driver, ac_ground=ac_ground)  # break_loop's own steps
    except NetloopError as exc:
        return NodeSplit(node, refused=str(exc))
    sides: dict[tuple[str, str], str] = {}
    for side, group in (("driver", split.driver), ("load", (*split.load, *split.shunt))):
        for t in group:
            for ft in _flat_terminals(netlist, circuit, index, scope, t.element, t.slot, globals_):
                sides.setdefault(ft, side)
    return NodeSplit(node, tuple(t.label for t in split.driver), tuple(t.label for t in (*split.load, *split.shunt)), sides)


_log = logging.getLogger("netloop")  # the status line (netloop.cli.status)


def probe_splits(netlist: Netlist, circuit: FlatCircuit, found: LoopDiscovery, *, checks: int = DEFAULT_SPLIT_CHECKS,
                 driver: str | None = None) -> LoopDiscovery:
    """``found`` with the first ``checks`` candidates of each group restated and re-ranked from the probe's real split.

    See netloop.graph.split_effects.apply_splits for what is said and how the candidates are ranked.
    """
    if checks < 1:
        return found
    ac_ground = ac_ground_nodes(netlist, frozenset(netlist.globals))
    index = {n: i for i, n in enumerate(circuit.names)}
    groups = []
    for g in found.groups:
        _log.info("working out the probe's split at the best %d break nodes of %s", min(checks, len(g.candidates)), g.label)
        splits = {c.node: node_split(netlist, circuit, c.node, driver=driver, ac_ground=ac_ground, index=index) for c in g.candidates[:checks]}
        groups.append(apply_splits(circuit, g, splits))
    return replace(found, groups=tuple(groups))


def discover_loops(
    netlist: Netlist | str | PathLike[str], *, length_bound: int = DEFAULT_LENGTH_BOUND, max_loops: int = DEFAULT_MAX_LOOPS,
    split_checks: int = DEFAULT_SPLIT_CHECKS,
) -> LoopDiscovery:
    """The loop groups of a netlist (a parsed Netlist, a path or netlist text), their loops and ranked break nodes.

    The first ``split_checks`` candidates of each group are stated from the probe's real split of the
    node (which loops it opens, which stay closed and why) and re-ranked; 0 keeps the structural view.
    """
    parsed = load_netlist(netlist)
    circuit = flatten(parsed)
    _log.info("finding the loops of %d elements", len(circuit))
    found = find_loops(circuit, length_bound=length_bound, max_loops=max_loops)
    found = probe_splits(parsed, circuit, found, checks=split_checks)
    _log.info("loop search done", extra=CLEARS_STATUS)  # a status line is cleared
    return found


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
    shown = "; ".join(f"loop {group.index}.{k}: {group.loops[k - 1].describe(16)}" for k in left[:3])
    more = f" and {len(left) - 3} more" if len(left) > 3 else ""
    return (f"loop {group.index}: breaking {node} leaves {len(left)} of its loops closed ({shown}{more}); "
            "the opened circuit may itself be unstable, so P (its right-half-plane poles) may be nonzero: read the Nyquist count with care")


def _measure_group(parsed: Netlist, group: LoopGroup, options: dict, notes: list[str]) -> LoopResult:
    tried = []
    for cand in group.candidates:
        label = f"loop {group.index} ({cand.node})"
        if cand.refused or (cand.split_checked and not cand.opened):
            why = cand.refused or "the probe's split there opens none of the group's loops"
            tried.append(f"{cand.node} ({why})")
            continue
        try:
            result = measure(parsed, cand.node, label=label, **options)
        except ProbeError as exc:
            tried.append(f"{cand.node} ({exc})")
            continue
        if tried:
            notes.append(f"loop {group.index}: could not break at {'; '.join(tried)}; fell back to rank {cand.rank}")
        notes.append(f"loop {group.index}: broken at {cand.node}: {cand.reason}")
        # Local loops kept closed on purpose (a Miller Cc with its stage) are stated in the reason, as common practice
        # measures the global loop with them closed; any other loop left closed is warned about and checked.
        other = tuple(k for k in cand.left_closed if k not in cand.kept_closed)
        if other:
            extra = [_closed_note(group, cand.node, other)]
            notes.extend(extra)
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

    ``measure_options`` are those of netloop.jobs.measure.measure (except ``at`` and ``label``); one
    simulator is started for all loops unless one is given. Each result is labelled
    ``loop K (NODE)``; the notes say which node was chosen for which group and why, which loops
    the probe's split there opens and which it leaves closed (local loops kept closed with their
    driver on purpose apart from the others, which are warned about). Raises ProbeError when the
    netlist has no loop.
    """
    parsed = load_netlist(netlist)
    options = {k: v for k, v in measure_options.items() if k not in ("at", "label")}
    circuit = flatten(parsed)
    _log.info("finding the loops of %d elements", len(circuit))
    found = find_loops(circuit)
    notes = list(found.notes)
    if not found.groups:
        raise ProbeError(f"no feedback loop found in {parsed.source}: no signal path leads from a node back to itself "
                         "without passing through ground or a supply; name a node with --at to break it anyway")
    if options.get("driver") is not None and len(found.groups) > 1:
        raise ProbeError(f"--driver names one break's driver, but {parsed.source} has {len(found.groups)} loop groups; give --at too")
    if options.get("driver") is None:
        options.pop("driver", None)
    found = probe_splits(parsed, circuit, found, driver=options.get("driver"))
    own = options.get("simulator") is None
    processes = options.pop("processes", None)
    if own:
        options["simulator"] = own_simulator(processes, parsed, 2, options.pop("keep_decks", None))
    try:
        results = [_measure_group(parsed, g, options, notes) for g in found.groups]
    finally:
        if own and hasattr(options["simulator"], "close"):
            options["simulator"].close()
    return results, notes
