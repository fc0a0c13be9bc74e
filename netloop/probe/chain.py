"""Two splits of one node in one netlist: the probes chained, each exactly transparent while the other measures.

A probe at rest (its series source 0 V, its shunt source 0 A, both at AC 0) joins its two sides with a
0 V source and injects nothing, so the circuit is the one without it. When a second split of a node
puts a subset of the first split's driver terminals on its driver side (a bridge moved from the driver
side to the load side), the two probes can sit in series: the second split's driver terminals on a
new node n1, its probe from n1 to n2 (the first split's driver side, keeping the other driver
terminals), the first probe from n2 to the node itself (the load side). Which probe measures is then
chosen by the AC magnitudes alone, so both splits run on one loaded circuit (netloop.sim: the same
netlist, saves and excitable sources) instead of ngspice reading the netlist and its model files twice.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace

from netloop.errors import ProbeError
from netloop.netlist.model import Netlist
from netloop.probe.breaking import locate_split, split_loop
from netloop.probe.records import ProbedNetlist, ProbeVectors

__all__ = ["Chain", "chain_probes"]


@dataclass(frozen=True, slots=True)
class Chain:
    """The first split on the chained netlist, and what the other split needs to run on the same circuit."""

    placement: Mapping[str, str]  # the other split's placement of the bridging elements
    first: ProbedNetlist  # the first split, measured on the chained netlist
    series_source: str  # the other split's probe sources and its vectors in the chained netlist
    shunt_source: str
    side_a: str
    vectors: ProbeVectors

    def other(self, plain: ProbedNetlist) -> ProbedNetlist:
        """The other split's record (``plain``: break_loop's for ``placement``, with its warnings) measured on the chained netlist."""
        return replace(plain, netlist=self.first.netlist, series_source=self.series_source, shunt_source=self.shunt_source,
                       side_a=self.side_a, vectors=self.vectors, circuit_sources=self.first.circuit_sources,
                       circuit_saves=self.first.circuit_saves)


def chain_probes(netlist: Netlist, at: str, first: ProbedNetlist, placement: Mapping[str, str]) -> Chain | None:
    """``first`` (break_loop's split of ``at`` in ``netlist``) chained with the split ``placement`` gives, or None when the two
    cannot share one netlist: the other split is refused, the node is inside an instance, or its driver terminals are not a
    proper subset of the first split's (the other terminals on both sides the same)."""
    if first.copied_subcircuits:
        return None
    try:
        scope, node, split = locate_split(netlist, at, placement=placement)
    except ProbeError:
        return None
    driver = {t.label for t in split.driver}
    moved = set(first.driver_terminals) - driver
    if (scope.path or any(t.slot < 0 for t in split.driver) or not moved or not driver < set(first.driver_terminals)
            or {t.label for t in split.load} != set(first.load_terminals) | moved or {t.label for t in split.shunt} != set(first.shunt_terminals)):
        return None
    # the other split's driver terminals move once more, from the first split's driver side to a node of their own
    inner, _ = split_loop(first.netlist, first.side_a, decided=(scope, first.side_a, split))
    vectors = ProbeVectors(va=inner.vectors.va, vb=first.vectors.vb, i_series=inner.vectors.i_series, node_a=inner.side_a,
                           node_b=first.side_b, branch=inner.vectors.branch)  # the load side read at the node: the first probe joins them with 0 V
    sources = (first.series_source, first.shunt_source, inner.series_source, inner.shunt_source)
    saves = tuple(dict.fromkeys((*first.vectors.save, *vectors.save)))
    chained = replace(first, netlist=inner.netlist, circuit_sources=sources, circuit_saves=saves)
    return Chain(dict(placement), chained, inner.series_source, inner.shunt_source, inner.side_a, vectors)
