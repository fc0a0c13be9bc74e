"""graph stage: the flattened circuit, its connectivity graph (networkx), hierarchy and loop discovery."""

from netloop.graph.flat import FlatCircuit, FlatElement, Net, Terminal
from netloop.graph.flatten import flatten

__all__ = ["FlatCircuit", "FlatElement", "Net", "Terminal", "flatten"]
