"""netlist stage: read ngspice netlists into frozen records with source locations, and write them back."""

from netloop.netlist.cards import controlling_sources
from netloop.netlist.devices import device_pin_roles, device_primitive, is_device_subcircuit
from netloop.netlist.location import SourceLocation
from netloop.netlist.model import Directive, Element, Inclusion, Netlist, Statement, Subcircuit
from netloop.netlist.reader import parse_file, parse_text
from netloop.netlist.size import flat_element_count
from netloop.netlist.values import parse_value
from netloop.netlist.writer import write_netlist

__all__ = [
    "Directive",
    "Element",
    "Inclusion",
    "Netlist",
    "SourceLocation",
    "Statement",
    "Subcircuit",
    "controlling_sources",
    "device_pin_roles",
    "device_primitive",
    "flat_element_count",
    "is_device_subcircuit",
    "parse_file",
    "parse_text",
    "parse_value",
    "write_netlist",
]
