"""netloop: loop gain and stability margins of feedback loops in SPICE netlists.

netlist   parse ngspice netlists into frozen records with source locations; write them back
graph     flattened connectivity and signal-flow graphs (networkx); loop discovery
probe     break a node, insert an exact small-signal probe: a new netlist and what was broken
sim       run ngspice (shared library in a worker process, or batch mode) on AC jobs
analysis  return ratio, margins, Nyquist count, peaking, closed-loop poles (numpy/scipy)
report    text, JSON, CSV, JUnit XML, plots and HTML from results
cli       the ``netloop`` command, a thin shell over this API
"""

__version__ = "0.1.0"

__all__ = ["__version__"]
