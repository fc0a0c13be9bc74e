"""netlist stage."""
