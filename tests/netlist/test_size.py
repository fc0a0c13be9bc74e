"""flat_element_count gives the size of the expanded circuit, as graph.flatten expands it."""

from __future__ import annotations

import pytest

from netloop.graph import flatten
from netloop.netlist import flat_element_count, parse_file, parse_text


@pytest.mark.parametrize("name", ["hier/top.cir", "miller_buffer.cir", "fd_amp_cmfb.cir", "sky130/ldo.cir", "testbench/ac_coupled.cir"])
def test_flat_count_equals_the_flattened_circuit(circuits, name):
    """On the demo circuits (nested instances, .lib sections, sky130 device wrappers) the count equals the number of
    elements graph.flatten produces (an independent expansion)."""
    netlist = parse_file(circuits / name)
    assert flat_element_count(netlist) == len(flatten(netlist))


def test_instances_multiply_and_unknown_or_recursive_definitions_count_once():
    """Three instances of a 2-element cell holding a 3-element cell count 3 * (2 + 3); an instance of a missing or
    self-including definition counts 1."""
    text = """t
.subckt inner a b
r1 a b 1k
r2 a b 1k
r3 a b 1k
.ends
.subckt cell a b
xi a b inner
c1 a 0 1p
r1 a b 1
.ends
.subckt loop a
xl a loop
.ends
x1 n1 n2 cell
x2 n2 n3 cell
x3 n3 0 cell
xm n1 0 missing
xr n1 loop
v1 n1 0 1
"""
    assert flat_element_count(parse_text(text)) == 3 * (2 + 3) + 1 + 1 + 1


def test_nested_definitions_are_counted_as_flatten_expands_them():
    """A definition nested inside another is found for the instances inside it; an M card whose model shares a subcircuit's
    name is one device; both as graph.flatten (an independent expansion) counts them."""
    text = """t
.subckt outer a b
.subckt inner p q
r1 p q 1k
r2 p q 1k
.ends inner
xi a b inner
m1 a b 0 0 inner
.ends outer
.model inner nmos
x1 n1 n2 outer
x2 n2 0 outer
"""
    netlist = parse_text(text)
    assert flat_element_count(netlist) == len(flatten(netlist)) == 2 * (2 + 1)
