"""Mirror-image nets: the two halves of a fully differential circuit.

Two nets a and b are mirror images when the circuit has a symmetry (an automorphism of its element-net
graph keeping every element's kind, model and values and every terminal's pin) that swaps a and b and
keeps at least one other net of the loops in place (the common-mode path: a pair's tail, the CMFB's sense
node). Such a pair carries a differential and a common-mode loop, which a break at one of the nets alone
mixes: its T is neither's (Hurst and Lewis, 1995, measure the two modes of a pair; netloop.jobs.measure_pair).

How: Weisfeiler-Lehman hashes of the labelled graph (networkx) propose the pairs, nets whose hashes match
and no third net shares; networkx's VF2 matcher then confirms each with an explicit symmetry that swaps the
two, and that symmetry must fix another net of the loops. R, C and L connect the same way either way round;
an independent source's AC part (an input driven at 180 deg) is not part of the symmetry, and neither are the
values of elements that touch no net of the loops (the testbench's input drivers, E sources of gain +0.5 and
-0.5 from one input: with the inputs silenced they hold both halves at the same DC; a real mismatch of the
halves' bias shows in the pair's coupling figures). A circuit larger
than MAX_ELEMENTS is not searched (the matcher's time is not bounded); its pairs are named with --at-pair.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    import networkx as nx

    from netloop.graph.flat import FlatCircuit

__all__ = ["MAX_ELEMENTS", "mirror_pairs"]

MAX_ELEMENTS = 5000  # our bound: a few ms of hashing on the bundled fully differential benches (about 35 elements)
_ITERATIONS = 8  # Weisfeiler-Lehman rounds: nets up to eight element hops apart tell the halves from other nets
_TURNABLE = frozenset("RCL")  # two-terminal parts whose pins are interchangeable


def _label(kind: str, element) -> str:
    """An element's kind and its card's values: every token but its nodes (an independent source's AC part left out)."""
    slots = set(element.node_slots)
    tokens = [t.lower() for k, t in enumerate(element.tokens) if k not in slots]
    if kind in "VI" and "ac" in tokens:
        tokens = tokens[: tokens.index("ac")]
    return " ".join((kind, *tokens))


def _graph(circuit: FlatCircuit, loop_nets: frozenset[str]) -> nx.Graph:
    """The element-net graph: a vertex per element labelled by _label (by its kind alone when it touches none of
    ``loop_nets``), a vertex per net (ground and globals by name), an edge per element and net it touches, labelled by the
    pins it touches there."""
    import networkx as nx

    fixed = {"0", *circuit.globals}
    g = nx.Graph()
    for net in circuit.nets:
        g.add_node(("net", net), label=f"net {net}" if net in fixed else "net")
    for i, (kind, nodes, pins, original) in enumerate(zip(circuit.kinds, circuit.element_nodes, circuit.element_pins, circuit.originals)):
        g.add_node(("element", i), label=_label(kind, original) if loop_nets.intersection(nodes) else kind)
        on: dict[str, list[str]] = {}
        for net, pin in zip(nodes, pins):
            on.setdefault(net, []).append("end" if kind in _TURNABLE else pin)
        for net, held in on.items():
            g.add_edge(("element", i), ("net", net), pins="+".join(sorted(held)))
    return g


def _swapping(g: nx.Graph, a: str, b: str) -> dict | None:
    """A symmetry of ``g`` that swaps nets a and b (VF2 on two copies marked a->b, b->a), or None."""
    from networkx.algorithms.isomorphism import GraphMatcher

    def marked(first: str, second: str) -> nx.Graph:
        copy = g.copy()
        copy.nodes[("net", first)]["label"] = "net: first of the pair"
        copy.nodes[("net", second)]["label"] = "net: second of the pair"
        return copy

    matcher = GraphMatcher(marked(a, b), marked(b, a), node_match=lambda x, y: x["label"] == y["label"],
                           edge_match=lambda x, y: x["pins"] == y["pins"])
    return matcher.mapping if matcher.is_isomorphic() else None


def mirror_pairs(circuit: FlatCircuit, nets: Iterable[str]) -> tuple[tuple[str, str], ...]:
    """The mirror-image pairs among ``nets`` (a loop group's nets), each (first in ``nets``' order, its mirror), in the
    order of their first net; () for a circuit above MAX_ELEMENTS elements."""
    import networkx as nx

    wanted = list(dict.fromkeys(nets))
    if len(circuit) > MAX_ELEMENTS or len(wanted) < 3:
        return ()
    g = _graph(circuit, frozenset(wanted))
    hashes = nx.weisfeiler_lehman_subgraph_hashes(g, node_attr="label", edge_attr="pins", iterations=_ITERATIONS)
    share: dict[str, list[str]] = {}
    for net in circuit.nets:
        share.setdefault(hashes[("net", net)][-1], []).append(net)
    pairs, taken = [], set()
    for net in wanted:
        alike = share.get(hashes[("net", net)][-1], []) if ("net", net) in hashes else []
        if net in taken or len(alike) != 2:
            continue
        other = alike[1] if alike[0] == net else alike[0]
        if other not in wanted:
            continue
        symmetry = _swapping(g, net, other)
        if symmetry is not None and any(symmetry[("net", n)] == ("net", n) for n in wanted if n not in (net, other)):
            pairs.append((net, other))
            taken.update((net, other))
    return tuple(pairs)
