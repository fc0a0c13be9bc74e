"""The probe's real split of each candidate break, stated for loop discovery: which flattened terminals go to which side."""

from __future__ import annotations

import logging
from collections.abc import Mapping
from dataclasses import replace

from netloop.analysis.results import Check
from netloop.errors import NetloopError
from netloop.graph import FlatCircuit, LoopDiscovery, LoopGroup, find_loops, flatten
from netloop.graph.split_effects import NOT_THROUGH, OPENED, LoopFate, NodeSplit, apply_splits, loop_fates
from netloop.netlist import Netlist
from netloop.netlist.model import Element
from netloop.probe.breaking import locate_split
from netloop.probe.scope import Scope, child_scope, elements_of, resolve_node
from netloop.probe.sides import ac_ground_nodes

__all__ = ["DEFAULT_SPLIT_CHECKS", "LoopStructure", "driver_alias", "node_split", "probe_splits"]

_log = logging.getLogger("netloop")  # the status line (netloop.cli.status)

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
               ac_ground: frozenset[str] | None = None, index: dict[str, int] | None = None,
               placement: Mapping[str, str] | None = None) -> NodeSplit:
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
        scope, _, split = locate_split(netlist, node, driver=driver, ac_ground=ac_ground, placement=placement)  # break_loop's own steps
    except NetloopError as exc:
        return NodeSplit(node, refused=str(exc))
    sides: dict[tuple[str, str], str] = {}
    for side, group in (("driver", split.driver), ("load", (*split.load, *split.shunt))):
        for t in group:
            for ft in _flat_terminals(netlist, circuit, index, scope, t.element, t.slot, globals_):
                sides.setdefault(ft, side)
    return NodeSplit(node, tuple(t.label for t in split.driver), tuple(t.label for t in (*split.load, *split.shunt)), sides)


def driver_alias(circuit: FlatCircuit, node: str, drivers: tuple[str, ...], index: dict[str, int]) -> str | None:
    """A deeper name of the net ``node``: its local name inside the deepest block whose element drives it, or None.

    A net that leaves a block through a pin has one name at each level (an amplifier's out, the bandgap's pg,
    the regulator's pbias); flattening names it by the outermost. The drivers sit in the innermost, so a
    break named there separates them from everything else on the net.
    """
    best: tuple[int, str] | None = None
    for el in drivers:
        i = index.get(el)
        if i is None:
            continue
        path = circuit.paths[i]
        for k, n in enumerate(circuit.element_nodes[i]):
            if n == node and k < len(circuit.originals[i].nodes):
                name = ".".join((*path, circuit.originals[i].nodes[k].lower()))
                if best is None or len(path) > best[0]:
                    best = (len(path), name)
    if best is None or best[1] == node or best[0] <= node.count("."):
        return None
    return best[1]


def _opened(circuit: FlatCircuit, group: LoopGroup, split: NodeSplit) -> int:
    return 0 if split.refused else sum(f.fate == OPENED for f in loop_fates(circuit, group.loops, split))


def probe_splits(netlist: Netlist, circuit: FlatCircuit, found: LoopDiscovery, *, checks: int = DEFAULT_SPLIT_CHECKS,
                 driver: str | None = None) -> LoopDiscovery:
    """``found`` with the first ``checks`` candidates of each group restated and re-ranked from the probe's real split.

    A candidate whose net has a deeper name inside the block that drives it (driver_alias) is also split
    under that name; when that split opens more of the group's loops, the candidate breaks there (its ``at``).
    See netloop.graph.split_effects.apply_splits for what is said and how the candidates are ranked.
    """
    if checks < 1:
        return found
    ac_ground = ac_ground_nodes(netlist, frozenset(netlist.globals))
    index = {n: i for i, n in enumerate(circuit.names)}
    groups = []
    for g in found.groups:
        _log.info("working out the probe's split at the best %d break nodes of %s", min(checks, len(g.candidates)), g.label)
        splits: dict[str, NodeSplit] = {}
        at: dict[str, str] = {}
        for c in g.candidates[:checks]:
            split = node_split(netlist, circuit, c.node, driver=driver, ac_ground=ac_ground, index=index)
            alias = driver_alias(circuit, c.node, c.drivers, index) if driver is None else None
            if alias is not None:
                inner = node_split(netlist, circuit, alias, driver=driver, ac_ground=ac_ground, index=index)
                inner = replace(inner, node=c.node)  # the same net: its loops are read at the flat node
                if _opened(circuit, g, inner) > _opened(circuit, g, split):
                    split, at[c.node] = inner, alias
            splits[c.node] = split
        g = apply_splits(circuit, g, splits)
        groups.append(replace(g, candidates=tuple(replace(c, at=at.get(c.node, "")) for c in g.candidates)))
    return replace(found, groups=tuple(groups))


class LoopStructure:
    """The loops through one net of a netlist and what a given split of it opens, worked out once (flatten and loop
    search) when a measurement asks: netloop.jobs.measure asks only when a measured T does not regulate, or is doubted."""

    def __init__(self, netlist: Netlist, at: str):
        self.netlist = netlist
        self.circuit = flatten(netlist)
        self.index = {n: i for i, n in enumerate(self.circuit.names)}
        globals_ = frozenset(netlist.globals)
        self.ac_ground = ac_ground_nodes(netlist, globals_)
        scope, local = resolve_node(netlist, at, globals_, lift=False)
        self.flat = scope.flat(local, globals_)
        found = find_loops(self.circuit)
        self.group: LoopGroup | None = next((g for g in found.groups if self.flat in g.nodes), None)

    def split(self, at: str, placement: Mapping[str, str] | None = None) -> NodeSplit:
        """The probe's split of the net under the name ``at``, stated on the flattened net."""
        split = node_split(self.netlist, self.circuit, at, ac_ground=self.ac_ground, index=self.index, placement=placement)
        return replace(split, node=self.flat)

    def fates(self, at: str, placement: Mapping[str, str] | None = None) -> tuple[LoopFate, ...]:
        """What the split under ``at`` does to each loop of the net's group; empty when the net is on no loop."""
        split = self.split(at, placement)
        if self.group is None or split.refused:
            return ()
        return loop_fates(self.circuit, self.group.loops, split)

    def opens_check(self, at: str, placement: Mapping[str, str] | None = None) -> Check | None:
        """The check "opens-loop": the split opens at least one of the loops that pass through the net (None when no loop
        found passes through it: the probe's own loop search speaks for such a node)."""
        through = [f for f in self.fates(at, placement) if f.fate != NOT_THROUGH]
        if self.group is None or not through:
            return None
        opened = [f for f in through if f.fate == OPENED]
        label = f"loop {self.group.index}"  # its number; its name follows the census's choice, made elsewhere
        if opened:
            return Check("opens-loop", True, f"the split at {at} opens {len(opened)} of the {len(through)} loop(s) of {label} through it")
        by: dict[str, int] = {}
        for f in through:
            by[f.fate] = by.get(f.fate, 0) + 1
        how = ", ".join(f"{n} {fate}" for fate, n in sorted(by.items()))
        alias = self.alias(at)
        where = (f"break the same net under the name it has inside the block that drives it (--at {alias}), " if alias else "")
        return Check("opens-loop", False,
                     f"the split at {at} opens none of the {len(through)} loop(s) of {label} that pass through the net ({how}): "
                     "T there measures no loop of the circuit, so its 'does not regulate' would be no promise",
                     f"{where}name the driver side with --driver, or break the loop at another node (netloop loops NETLIST lists "
                     "what each break opens)")

    def alias(self, at: str) -> str | None:
        """A deeper name of the net, inside the block that drives it (driver_alias), when ``at`` is not already that name."""
        if self.group is None:
            return None
        cand = next((c for c in self.group.candidates if c.node == self.flat), None)
        drivers = cand.drivers if cand is not None and cand.drivers else tuple(
            dict.fromkeys(el for (el, _), side in self.split(at).sides.items() if side == "driver"))
        alias = driver_alias(self.circuit, self.flat, drivers, self.index)
        return None if alias is None or alias == at.strip().lower() else alias
