"""The signal-flow view of a flattened circuit: which node's small signal each element passes to which other node.

Rules (one per element letter; an edge is ``control node -> output node``):

- MOSFET/JFET/MESFET (M, J, Z): the channel current is set by v_gs, v_ds and v_bs and flows into
  drain and source, so the gate drives drain and source (common source, source follower), the
  source drives the drain (common gate, cascode) and a bulk that is a signal node drives drain and
  source. There is no drain -> source edge: the drain reaches the source only through the output
  conductance, a second-order path that would otherwise make every transistor with a signal
  source node (a pair's tail, a cascode) a two-node loop of its own.
- BJT (Q): base -> collector, base -> emitter, emitter -> collector, for the same reasons; the
  substrate pin carries no signal.
- Controlled sources E and G: every controlling node (``cp``/``cn``, POLY pairs) -> both output
  nodes; F and H: the nodes of each controlling voltage source -> both output nodes. A behavioural
  E, G or B whose value is an expression: every node named in ``v(...)`` -> both output nodes, and
  the nodes of every source named in ``i(...)``.
- Passives both ways (``passive=True``): R, C, L, D, a switch's two terminals (a small-signal
  resistance), independent V sources between two signal nodes (an AC short), every pair of pins
  of a transmission line (T, O, U), of an XSPICE model (A) and of an X instance left unexpanded,
  and the inductors coupled by K.
- Independent current sources carry no signal (infinite small-signal impedance).
- Ground, ``.global`` nets and supplies (nets tied to ground through independent V sources) are not
  signal nodes: no edge starts or ends there.
- A diode-connected transistor (gate on drain, base on collector, directly or through a 0 V
  source) is a two-terminal device (its current depends on one voltage only): a passive both ways between drain and source (collector
  and emitter). So is the input device of a cascoded mirror, whose drain reaches its gate through a
  cascode's channel (source to drain) and whose source is a rail (``cascode_diodes``): with its
  cascode it is the mirror's diode, and the node on its gate the mirror's input. An edge from a node
  to itself is dropped: it is a local impedance, not a loop one could break.

Device-wrapper X instances (e.g. sky130's ``sky130_fd_pr__nfet_01v8``) are transistors here, since
flattening already keeps them as one device with the device's pin roles; other X instances are
expanded by flattening and their elements carry hierarchical names.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING

from netloop.errors import NetloopError
from netloop.graph.connectivity import supply_nets
from netloop.graph.flat import GROUND_NAMES
from netloop.netlist.cards import controlling_sources, expression_references

if TYPE_CHECKING:
    import networkx as nx

    from netloop.graph.flat import FlatCircuit

__all__ = ["CONTROL_PINS", "FlowEdge", "cascode_diodes", "element_edges", "flow_edges", "signal_flow_graph", "signal_nodes"]

_TRANSISTOR = {"M": ("g", "s", "b"), "J": ("g", "s"), "Z": ("g", "s"), "Q": ("b", "e")}  # controls; outputs below
_T_OUTPUTS = {"M": ("d", "s"), "J": ("d", "s"), "Z": ("d", "s"), "Q": ("c", "e")}
_TWO_WAY = frozenset("RCLDS")  # S: only its p/n terminals
_ALL_PAIRS = frozenset("TOUAX")

# Pins that sense a voltage without loading the node (a gate, a base, a controlling input).
CONTROL_PINS = frozenset(("g", "b", "cp", "cn"))


@dataclass(frozen=True, slots=True)
class FlowEdge:
    """One way an element passes signal: from ``source`` (its ``source_pin``) to ``target``."""

    source: str
    target: str
    element: str  # hierarchical element name
    index: int  # position of the element in the FlatCircuit
    source_pin: str
    target_pin: str
    passive: bool  # True for the two-way edges of passive parts


def signal_nodes(circuit: FlatCircuit) -> frozenset[str]:
    """Every net except ground, ``.global`` nets and supplies."""
    dead = {*circuit.ground, *circuit.globals, *supply_nets(circuit)}
    return frozenset(n for n in circuit.nets if n not in dead)


def _lookup(circuit: FlatCircuit, index: int, name: str) -> tuple[str, ...] | None:
    """Nodes of the element ``name`` seen from the scope of element ``index`` (searched outward)."""
    path = circuit.paths[index]
    for depth in range(len(path), -1, -1):
        full = ".".join((*path[:depth], name.lower()))
        try:
            return circuit.element(full).nodes
        except NetloopError:
            continue
    return None


def _pin_nets(circuit: FlatCircuit, path: tuple[str, ...]) -> dict[str, str]:
    """Pin name -> the parent's net, for the expanded instance at ``path`` (as flatten connected them)."""
    got = circuit._cache.get("pin_nets")
    if got is None:
        got = {p: dict(zip(pins, nets)) for p, pins, nets in circuit.instance_pins}
        circuit._cache["pin_nets"] = got
    return got.get(path, {})


def _expression_controls(circuit: FlatCircuit, index: int) -> list[tuple[str, str]]:
    """(node, pin label) pairs an expression-valued E/G/B reads.

    A node named inside an instance is mapped as flatten maps a card's nodes (a pin to the parent's net,
    whether or not another element of the instance touches it; a global as it is; any other name to the
    instance's own net), as ngspice's subcircuit expansion rewrites ``v(...)`` (its ``listing e``).
    """
    named, sources = expression_references(circuit.originals[index])
    path = circuit.paths[index]
    prefix = "".join(p + "." for p in path)
    glob = {*circuit.globals, *GROUND_NAMES}
    pins = _pin_nets(circuit, path) if path else {}
    out = []
    for node in named:
        if path:
            node = pins.get(node) or (node if node in glob else prefix + node)
        out.append(("0" if node == "gnd" else node, "cp"))
    for name in sources:
        nodes = _lookup(circuit, index, name)
        if nodes:
            out.extend((n, "cp") for n in nodes)
    return out


def cascode_diodes(circuit: FlatCircuit, signal: frozenset[str]) -> frozenset[str]:
    """The transistors diode-connected through a cascode: the gate (base) on a signal node n, the source (emitter) on a
    rail, the drain (collector) on a signal node m from which another transistor's channel, source to drain, leads
    back to n. That is the input of a cascoded current mirror (the cascode's gate biased, or driven by a gain-boosting
    amplifier): its drain current returns to its own gate, so with its cascode it is a one-port at n. Counted as an
    amplifier, its gate-to-drain step made a loop n -> m -> n with the cascode that a designer does not name, and the
    census broke a gain-boosted folded-cascode OTA at its mirror's input instead of its output
    (circuits/testbench/boosted_fc.cir)."""
    by_follower: dict[str, list[tuple[str, str]]] = {}  # node -> (transistor, its output node) with its source there
    found: list[tuple[str, str, str]] = []  # (transistor, gate node, drain node) with the source on a rail
    for i, kind in enumerate(circuit.kinds):
        if kind not in _TRANSISTOR:
            continue
        at = dict(zip(circuit.element_pins[i], circuit.element_nodes[i]))
        control, (output, follower) = _TRANSISTOR[kind][0], _T_OUTPUTS[kind]
        n, m, rail = at.get(control), at.get(output), at.get(follower)
        if m in signal and rail in signal:
            by_follower.setdefault(rail, []).append((circuit.names[i], m))
        if n in signal and m in signal and n != m and rail is not None and rail not in signal:
            found.append((circuit.names[i], n, m))
    return frozenset(name for name, n, m in found if any(back == n for other, back in by_follower.get(m, ()) if other != name))


def element_edges(circuit: FlatCircuit, index: int, signal: frozenset[str], joined: Mapping[str, str] | None = None,
                  cascoded: frozenset[str] = frozenset()) -> list[FlowEdge]:
    """The signal-flow edges of one element (see the module docstring), between signal nodes only.

    ``joined`` maps nodes joined by zero-impedance series elements to one name
    (netloop.graph.collapse.Shorts.vertex): a transistor whose gate reaches its drain that way is
    diode-connected too, and so is one named in ``cascoded`` (cascode_diodes). The edges keep the
    element's own nodes.
    """
    name, kind = circuit.names[index], circuit.kinds[index]
    nodes, pins = circuit.element_nodes[index], circuit.element_pins[index]
    out: list[FlowEdge] = []

    def add(a: str, pa: str, b: str, pb: str, passive: bool) -> None:
        if a != b and a in signal and b in signal:
            out.append(FlowEdge(a, b, name, index, pa, pb, passive))

    def both(pairs) -> None:
        pairs = list(pairs)
        for i, (a, pa) in enumerate(pairs):
            for b, pb in pairs[i + 1:]:
                add(a, pa, b, pb, True)
                add(b, pb, a, pa, True)

    if kind in _TRANSISTOR:
        at = dict(zip(pins, nodes))
        control, output = _TRANSISTOR[kind][0], _T_OUTPUTS[kind][0]
        same = at.get(control) == at.get(output) or (joined is not None and control in at and output in at
                                                     and joined.get(at[control], at[control]) == joined.get(at[output], at[output]))
        if control in at and (same or name in cascoded):  # diode-connected (directly, through a 0 V source or a cascode)
            both((at[p], p) for p in (output, _T_OUTPUTS[kind][1]) if p in at)
            return out
        controls = [(at[p], p) for p in _TRANSISTOR[kind] if p in at]
        outputs = [(at[p], p) for p in _T_OUTPUTS[kind] if p in at]
        for a, pa in controls:
            for b, pb in outputs:
                if pa != pb:
                    add(a, pa, b, pb, False)
    elif kind in _TWO_WAY:
        both(zip(nodes[:2], pins[:2]))
    elif kind == "V":
        both(zip(nodes, pins))
    elif kind in "EGB":
        outputs = [(n, p) for n, p in zip(nodes, pins) if p in ("p", "n")]
        controls = [(n, p) for n, p in zip(nodes, pins) if p not in ("p", "n")] or _expression_controls(circuit, index)
        for a, pa in controls:
            for b, pb in outputs:
                add(a, pa, b, pb, False)
    elif kind in "FH":
        outputs = list(zip(nodes, pins))
        for src in controlling_sources(circuit.originals[index]):
            for a in _lookup(circuit, index, src) or ():
                for b, pb in outputs:
                    add(a, "cp", b, pb, False)
    elif kind == "K":
        coupled = [n for tok in circuit.originals[index].tokens[:2] for n in (_lookup(circuit, index, tok) or ())]
        both((n, "l") for n in coupled)
    elif kind in _ALL_PAIRS:
        both(zip(nodes, pins))
    return out


def flow_edges(circuit: FlatCircuit, signal: frozenset[str] | None = None) -> Iterator[FlowEdge]:
    """Every signal-flow edge of the circuit, element by element."""
    if signal is None:
        signal = signal_nodes(circuit)
    cascoded = cascode_diodes(circuit, signal)
    for i in range(len(circuit)):
        yield from element_edges(circuit, i, signal, cascoded=cascoded)


def signal_flow_graph(circuit: FlatCircuit) -> nx.MultiDiGraph:
    """A directed multigraph over the signal nodes, one edge per FlowEdge.

    Edge key is ``(element, source pin, target pin)``; attributes ``element``, ``pins`` and ``passive``.
    """
    import networkx as nx

    signal = signal_nodes(circuit)
    g = nx.MultiDiGraph()
    g.add_nodes_from(n for n in circuit.nets if n in signal)
    g.add_edges_from(
        (e.source, e.target, (e.element, e.source_pin, e.target_pin), {"element": e.element, "pins": (e.source_pin, e.target_pin), "passive": e.passive})
        for e in flow_edges(circuit, signal)
    )
    return g
