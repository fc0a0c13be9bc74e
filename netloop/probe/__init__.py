"""probe stage: break a node into a driver side and a load side and insert the exact two-run probe."""

from netloop.probe.breaking import break_loop, split_loop
from netloop.probe.records import ProbedNetlist, ProbeQuantities, ProbeVectors

__all__ = ["ProbeQuantities", "ProbeVectors", "ProbedNetlist", "break_loop", "split_loop"]
