"""What a given split of a break node does to each loop of its group, and the ranking and reasons that follow.

The graph stage knows the loops but not how the probe will split a node; the probe stage knows the
split but not the loops. A caller that has both (netloop.jobs.discover) hands the split to
``apply_splits`` as a ``NodeSplit``: which side each flattened terminal ``(element, pin)`` at the
node goes to. A loop passing the node is opened when its way in and its way out sit on opposite
sides of the split, and stays closed when both sit on one side. A loop that stays closed on the
driver side, enters the node through an active output (a drain, a collector, a controlled
source) and leaves it through a passive network (R, C, L) is the driver stage's own feedback, e.g.
a Miller capacitor kept with its amplifier on purpose: a *local* loop. (One that leaves through an
active input on the driver side is closed around the probe, not local: the split put the loop's
input with its driver, as when a whole block's pin is the driver side.) The ranking then prefers a node whose split opens every loop of the group
except local loops (common practice: the global loop is measured with the local compensation in
place), and each reason says plainly which loops are opened and which stay closed, and why.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING

from netloop.errors import NetloopError
from netloop.graph.collapse import Shorts, series_shorts
from netloop.graph.loop_records import BreakCandidate, Loop, LoopGroup
from netloop.graph.signal_flow import element_edges, signal_nodes

if TYPE_CHECKING:
    from netloop.graph.flat import FlatCircuit

__all__ = ["CLOSED_DRIVER", "CLOSED_LOAD", "LOCAL", "NOT_THROUGH", "OPENED", "LoopFate", "NodeSplit", "apply_splits", "loop_fates"]

OPENED = "opened"  # way in and way out on opposite sides: the loop runs through the probe
LOCAL = "local"  # both on the driver side, entering through an active output: the driver stage's own loop
CLOSED_DRIVER = "closed on the driver side"
CLOSED_LOAD = "closed on the load side"
NOT_THROUGH = "not through the node"  # the loop does not pass the node, or passes around it on a parallel passive path


@dataclass(frozen=True, slots=True)
class NodeSplit:
    """How the probe splits one node: the side of each flattened terminal there, or why it cannot break there.

    Terminals missing from ``sides`` are on the load side (the probe moves only driver-side terminals).
    """

    node: str
    driver: tuple[str, ...] = ()  # the probe's driver-side terminal labels ("m6.d", "cc.n", "xa2.out")
    load: tuple[str, ...] = ()  # the probe's load-side terminal labels, shunts included
    sides: Mapping[tuple[str, str], str] = field(default_factory=dict)  # (flat element, pin) -> "driver" | "load"
    refused: str = ""  # the probe's reason for refusing to break here; empty when it can


@dataclass(frozen=True, slots=True)
class LoopFate:
    """What one split does to one loop: its fate and the terminals by which the loop meets the node."""

    number: int  # 1-based within the group
    fate: str  # OPENED, LOCAL, CLOSED_DRIVER, CLOSED_LOAD or NOT_THROUGH
    way_in: tuple[tuple[str, str], ...] = ()  # (element, pin) terminals the loop enters the node by
    way_out: tuple[tuple[str, str], ...] = ()  # ... and leaves it by


def _pins(circuit: FlatCircuit, signal: frozenset[str], at_node: dict[str, list[tuple[str, int]]], step, node: str, into: bool):
    """The (element, pin) terminals at ``node`` by which one step enters (``into``) or leaves it."""
    out = []
    for el in step.elements:
        here = at_node.get(el, ())
        if not here:
            # no terminal of its own on the node: an expression reading v(node), an F/H sensing through a V source,
            # coupled inductors. It meets the node by name, which the probe leaves on the load side.
            out.append((el, ""))
        elif step.passive:
            out.extend((el, pin) for pin, _ in here)
        else:
            for e in element_edges(circuit, here[0][1], signal):
                if not e.passive and (e.source, e.target) == (step.source, step.target):
                    out.append((el, e.target_pin if into else e.source_pin))
    return tuple(dict.fromkeys(out))


def _resolved(terminals, node: str, shorts: Shorts) -> list[tuple[str, str]]:
    """(element, pin) terminals as seen at the real ``node``: one on another node joined to it by 0 V sources is
    reached through the first of those sources, whose terminal at ``node`` stands for it."""
    out = []
    for el, pin, at in terminals:
        via = None if at == node else shorts.way(node, at)
        out.append(via if via is not None else (el, pin))
    return out


def _passive(circuit: FlatCircuit, element: str) -> bool:
    try:
        return circuit.element(element).kind in "RCL"
    except NetloopError:  # a name the circuit does not know (read by name in an expression) is not passive
        return False


def loop_fates(circuit: FlatCircuit, loops: tuple[Loop, ...], split: NodeSplit, signal: frozenset[str] | None = None) -> tuple[LoopFate, ...]:
    """The fate of every loop of a group under one split of ``split.node`` (see the module docstring)."""
    if signal is None:
        signal = signal_nodes(circuit)
    node = split.node
    shorts = series_shorts(circuit, signal)
    vertex = shorts.of(node)
    at_node: dict[str, list[tuple[str, int]]] = {}
    for t in circuit.terminals(node):
        at_node.setdefault(t.element, []).append((t.pin, t.index))
    fates = []
    for k, lp in enumerate(loops, 1):
        if node not in lp.opened_by:
            fates.append(LoopFate(k, NOT_THROUGH))
            continue
        way_in: list[tuple[str, str]] = []
        way_out: list[tuple[str, str]] = []
        for s in lp.steps:
            if s.target == vertex:
                way_in.extend(_resolved(s.enters, node, shorts) if s.enters else _pins(circuit, signal, at_node, s, node, True))
            if s.source == vertex:
                way_out.extend(_resolved(s.leaves, node, shorts) if s.leaves else _pins(circuit, signal, at_node, s, node, False))
        way_in_t, way_out_t = tuple(dict.fromkeys(way_in)), tuple(dict.fromkeys(way_out))
        sides = {split.sides.get(t, "load") for t in (*way_in_t, *way_out_t)}
        if len(sides) != 1:
            fate = OPENED
        elif sides == {"load"}:
            fate = CLOSED_LOAD
        elif any(s.target == vertex and not s.passive for s in lp.steps) and all(_passive(circuit, el) for el, _ in way_out_t):
            fate = LOCAL
        else:
            fate = CLOSED_DRIVER
        fates.append(LoopFate(k, fate, way_in_t, way_out_t))
    return tuple(fates)


def _nums(group: LoopGroup, nums) -> str:
    return ", ".join(f"{group.index}.{k}" for k in nums)


def _loops(group: LoopGroup, nums) -> str:
    return f"{'loop' if len(nums) == 1 else 'loops'} {_nums(group, nums)}"


def _names(terminals) -> str:
    return ", ".join(dict.fromkeys(e for e, _ in terminals))


def _why_closed(group: LoopGroup, node: str, fates: list[LoopFate], local_at: dict[int, str]) -> list[str]:
    """Loops left closed, grouped by why, each group in a few words."""
    out = []
    by: dict[str, list[LoopFate]] = {}
    for f in fates:
        by.setdefault(f.fate, []).append(f)
    one = {k: len(v) == 1 for k, v in by.items()}
    if LOCAL in by:
        fs = by[LOCAL]
        ins = _names(t for f in fs for t in f.way_in)
        outs = _names(t for f in fs for t in f.way_out)
        out.append(f"{_loops(group, [f.number for f in fs])} (from {ins} back through {outs}: the driver stage's own feedback, "
                   f"which the probe keeps on the driver side)")
    for fate, side in ((CLOSED_LOAD, "load"), (CLOSED_DRIVER, "driver")):
        if fate in by:
            fs = by[fate]
            way = _names(t for f in fs for t in (*f.way_in, *f.way_out))
            out.append(f"{_loops(group, [f.number for f in fs])} (enter{'s' if one[fate] else ''} and leave{'s' if one[fate] else ''} "
                       f"{node} on the {side} side, through {way})")
    if NOT_THROUGH in by:
        fs = by[NOT_THROUGH]
        held = [f.number for f in fs if f.number in local_at]  # only these are some split's local loops
        where = ", ".join(sorted({local_at[k] for k in held}))
        which = ("it" if one[NOT_THROUGH] else "them") if len(held) == len(fs) else _loops(group, held)
        kept = f"; the probe keeps {which} closed with the driver at {where}" if held else ""
        out.append(f"{_loops(group, [f.number for f in fs])} ({'does' if one[NOT_THROUGH] else 'do'} not pass {node}{kept})")
    return out


def _reason(group: LoopGroup, c: BreakCandidate, split: NodeSplit, fates: tuple[LoopFate, ...], local: frozenset[int],
            local_at: dict[int, str]) -> str:
    total = len(group.loops)
    opened = [f.number for f in fates if f.fate == OPENED]
    closed = [f for f in fates if f.fate != OPENED]
    kept = [f for f in closed if f.number in local]
    other = [f for f in closed if f.number not in local]
    how = f"the probe splits {c.node} into driver side {', '.join(split.driver)} and load side {', '.join(split.load) or '(none)'}"
    if not opened:
        parts = [f"{how}, which opens none of the group's loops: " + "; ".join(_why_closed(group, c.node, closed, local_at))
                 + "; T there measures no loop of the group"]
    elif not closed:
        found = f"all {total} loops found (the search was capped)" if group.capped else (f"all {total} loops" if total > 1 else "the loop")
        parts = [f"{how}, which opens {found} of the group: T is the whole return ratio and the opened circuit has no other loop of the group"]
    else:
        mine = [k for k in opened if k in local]  # local loops this split opens: their compensation is not in place in T
        if mine:
            at, single = ", ".join(sorted({local_at[k] for k in mine})), len(mine) == 1
            what = (f" (the local {_loops(group, mine)} among them: a split at {at} keeps {'it' if single else 'them'} closed with "
                    f"{'its' if single else 'their'} driver)")
        else:
            what = " (the global loop)" if not other else ""
        parts = [f"{how}; it opens {_loops(group, opened)}{what}"]
        if kept:
            intended = ", as intended" if all(f.fate == LOCAL for f in kept) else ""
            whole = ": T is the global return ratio with the local compensation in place" if not other and not mine else ""
            parts.append(f"the local {' and '.join(_why_closed(group, c.node, kept, local_at))} {'stays' if len(kept) == 1 else 'stay'} closed{intended}{whole}")
        if other:
            parts.append("it leaves " + " and ".join(_why_closed(group, c.node, other, local_at)) + " closed")
    if c.single_driver:
        parts.append(f"driven by one element ({c.drivers[0]})")
    elif c.drivers:
        parts.append(f"driven by {len(c.drivers)} elements ({', '.join(c.drivers)})")
    if c.high_impedance_load:
        parts.append(f"it drives only high-impedance inputs ({', '.join(c.loads)})")
    if c.low_impedance_driver:
        parts.append("its driver is a low-impedance output (follower or controlled voltage source)")
    return "; ".join(parts)


def apply_splits(circuit: FlatCircuit, group: LoopGroup, splits: Mapping[str, NodeSplit], signal: frozenset[str] | None = None) -> LoopGroup:
    """The group with each candidate in ``splits`` restated from the probe's real split, and re-ranked.

    Ranking (best first): candidates whose split was given and accepted, then candidates not looked at (in their
    structural order), then nodes the probe refuses. Among the first: a split that opens some loop before one
    that opens none; fewer loops left closed that are not local loops (a loop is local when some given split
    keeps it closed with its driver, fate LOCAL); more loops opened; then the structural preferences of
    netloop.graph.break_points (one driver, high-impedance loads, low-impedance driver, shallow name, order).
    """
    if signal is None:
        signal = signal_nodes(circuit)
    fates = {c.node: loop_fates(circuit, group.loops, splits[c.node], signal)
             for c in group.candidates if c.node in splits and not splits[c.node].refused}
    local_at: dict[int, str] = {}
    for c in group.candidates:  # structural order: the first node that keeps the loop with its driver is named
        for f in fates.get(c.node, ()):
            if f.fate == LOCAL:
                local_at.setdefault(f.number, c.node)
    local = frozenset(local_at)
    rows = []
    for c in group.candidates:
        split = splits.get(c.node)
        if split is None:
            rows.append(((1, 0, 0, 0, c.rank), c))
            continue
        if split.refused:
            reason = f"the probe cannot break here: {split.refused}"
            rows.append(((2, 0, 0, 0, c.rank), replace(c, opens_all=False, opened=(), left_closed=tuple(range(1, len(group.loops) + 1)),
                                                       kept_closed=(), split_checked=True, refused=split.refused, reason=reason)))
            continue
        fs = fates[c.node]
        opened = tuple(f.number for f in fs if f.fate == OPENED)
        left = tuple(f.number for f in fs if f.fate != OPENED)
        kept = tuple(k for k in left if k in local)
        tail = (not c.single_driver, not c.high_impedance_load, not c.low_impedance_driver, c.node.count("."), c.rank)
        key = (0, not opened, len(left) - len(kept), -len(opened), tail)
        rows.append((key, replace(c, opens_all=not left, opened=opened, left_closed=left, kept_closed=kept, split_checked=True,
                                  driver_side=split.driver, load_side=split.load, reason=_reason(group, c, split, fs, local, local_at))))
    rows.sort(key=lambda r: r[0])
    return replace(group, candidates=tuple(replace(c, rank=r) for r, (_, c) in enumerate(rows, 1)))
