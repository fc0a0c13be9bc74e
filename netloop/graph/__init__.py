"""graph stage: the flattened circuit, its connectivity graph (networkx), hierarchy and loop discovery."""

from netloop.graph.connectivity import connectivity_graph, supply_nets
from netloop.graph.flat import FlatCircuit, FlatElement, Net, Terminal
from netloop.graph.flatten import flatten
from netloop.graph.loop_records import BreakCandidate, Loop, LoopDiscovery, LoopGroup, Step
from netloop.graph.loops import find_loops
from netloop.graph.signal_flow import FlowEdge, signal_flow_graph, signal_nodes

__all__ = [
    "BreakCandidate",
    "FlatCircuit",
    "FlatElement",
    "FlowEdge",
    "Loop",
    "LoopDiscovery",
    "LoopGroup",
    "Net",
    "Step",
    "Terminal",
    "connectivity_graph",
    "find_loops",
    "flatten",
    "signal_flow_graph",
    "signal_nodes",
    "supply_nets",
]
