"""Records of loop discovery: the steps of a loop, its loops, break candidates, loop groups."""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["BreakCandidate", "Loop", "LoopDiscovery", "LoopGroup", "Step"]


@dataclass(frozen=True, slots=True)
class Step:
    """One step around a loop: ``elements`` (in parallel) pass the signal from ``source`` to ``target``."""

    elements: tuple[str, ...]  # hierarchical element names
    source: str
    target: str
    pins: tuple[str, str]  # pins of the first element at source and target ("g", "d"); ("", "") for a passive step
    passive: bool
    # (element, pin, node) terminals by which the step leaves ``source`` and enters ``target``; the node is the real
    # (flattened) node, which differs from source/target when a 0 V source joins it to them (netloop.graph.collapse)
    leaves: tuple[tuple[str, str, str], ...] = ()
    enters: tuple[tuple[str, str, str], ...] = ()
    through: tuple[str, ...] = ()  # nodes looked through inside the step (a mirror's input, a pair's tail), in order

    def describe(self) -> str:
        who = "|".join(self.elements)
        if not self.passive and self.pins[0] and len(self.elements) == 1:
            who += f"({self.pins[0]}>{self.pins[1]})"
        if self.through:
            who += f" via {','.join(self.through)}"
        return f"-{who}->"


@dataclass(frozen=True, slots=True)
class Loop:
    """One elementary feedback loop: its steps in signal order, closing back on the first node."""

    steps: tuple[Step, ...]
    opened_by: tuple[str, ...]  # nodes whose break opens this loop, in loop order

    @property
    def nodes(self) -> tuple[str, ...]:
        """The nodes the loop passes, in order, from the first."""
        return tuple(s.source for s in self.steps)

    @property
    def passes(self) -> tuple[str, ...]:
        """Every node the loop passes, in order: the step nodes and the nodes looked through inside steps."""
        return tuple(n for s in self.steps for n in (s.source, *s.through))

    @property
    def elements(self) -> tuple[str, ...]:
        """Every element on the loop, in order, each once."""
        return tuple(dict.fromkeys(e for s in self.steps for e in s.elements))

    @property
    def active_steps(self) -> int:
        return sum(1 for s in self.steps if not s.passive)

    def describe(self, most: int | None = None) -> str:
        """``out -m1(g>d)-> d1 -m4(g>d)-> o1 -m6(g>d)-> out``.

        With ``most``, a loop of more steps than that (one through a parasitic RC network may have
        tens of thousands) shows its first and last ``most // 2`` steps around ``... N more steps ...``.
        """
        steps = self.steps
        if most is not None and len(steps) > max(most, 2):
            head, tail = steps[: max(most // 2, 1)], steps[-max(most // 2, 1):]
            left = " ".join(part for s in head for part in (s.describe(), s.target))
            right = " ".join(part for s in tail for part in (s.describe(), s.target))
            return f"{steps[0].source} {left} ... {len(steps) - len(head) - len(tail)} more steps ... {tail[0].source} {right}"
        parts = [steps[0].source]
        for s in steps:
            parts += [s.describe(), s.target]
        return " ".join(parts)


@dataclass(frozen=True, slots=True)
class BreakCandidate:
    """A node where the group's loops can be broken, its rank in the group (1 = best) and why."""

    node: str
    rank: int
    opens_all: bool  # a break here opens every loop found in the group (none is left closed)
    opened: tuple[int, ...]  # numbers (1-based, within the group) of the loops a break here opens
    left_closed: tuple[int, ...]  # the group's loops a break here leaves closed (kept_closed included)
    drivers: tuple[str, ...]  # elements driving the node from inside the group
    loads: tuple[str, ...]  # "element.pin" terminals the node drives inside the group
    single_driver: bool
    high_impedance_load: bool  # every load terminal is a gate, base or controlling input
    low_impedance_driver: bool  # the one driver is a follower output or a controlled voltage source
    reason: str  # one sentence
    # Set from the probe's real split of the node (netloop.graph.split_effects.apply_splits); until then the
    # fields above are structural: ``opened`` lists the loops through the node, as a split separating each
    # loop's way in from its way out would open them.
    kept_closed: tuple[int, ...] = ()  # local loops left closed on purpose (the driver stage's own feedback); within left_closed
    split_checked: bool = False  # opened/left_closed/reason follow the probe's actual split of the node
    driver_side: tuple[str, ...] = ()  # the probe's driver-side terminals ("m6.d", "cc.n")
    load_side: tuple[str, ...] = ()  # the probe's load-side terminals, shunts included
    refused: str = ""  # why the probe cannot break this node (empty when it can or was not asked)
    # the name the probe is given for this node: "" for the node itself, or a deeper name of the same net, at the level of
    # the block whose element drives it (a pin inside that block), when the probe's split there opens more of the group
    at: str = ""

    @property
    def break_name(self) -> str:
        """The name to break: ``at`` when set, else the node."""
        return self.at or self.node


@dataclass(frozen=True, slots=True)
class LoopGroup:
    """A strongly connected part of the signal-flow graph: loops that can reach each other."""

    index: int  # 1-based, in order of the circuit's first node of the group
    nodes: tuple[str, ...]  # every node on one of its loops (looked-through and joined nodes included), in circuit order
    loops: tuple[Loop, ...]
    capped: bool  # True when more loops exist than were enumerated
    candidates: tuple[BreakCandidate, ...]  # best first
    looked_through: tuple[str, ...] = ()  # nodes inside a stage, passed through by the loops' steps (netloop.graph.collapse)
    merged: tuple[tuple[str, ...], ...] = ()  # nodes joined by 0 V (independent voltage) sources, each group as one loop node

    @property
    def best(self) -> BreakCandidate:
        return self.candidates[0]

    @property
    def label(self) -> str:
        """``loop 1 (out)``: the group's number and its best break node."""
        return f"loop {self.index} ({self.best.break_name})"


@dataclass(frozen=True, slots=True)
class LoopDiscovery:
    """Every loop group of a circuit, and notes on how the search was bounded."""

    groups: tuple[LoopGroup, ...]
    signal_nodes: int
    length_bound: int
    max_loops: int
    notes: tuple[str, ...] = ()
