"""Where a card a simulator printed back (its first word the element's name) was written in the user's files."""

from __future__ import annotations

from collections.abc import Iterator

from netloop.netlist.location import SourceLocation
from netloop.netlist.model import Directive, Element, Netlist, Subcircuit

__all__ = ["card_location"]


def _statements(statements) -> Iterator[Element | Directive]:
    """Every element and dot statement of ``statements``, those inside subcircuit definitions (at any depth) too."""
    for s in statements:
        if isinstance(s, Subcircuit):
            yield from _statements(s.body)
        else:
            yield s


def card_location(netlist: Netlist, card: str) -> SourceLocation | None:
    """The file:line of the element whose card ngspice printed as ``card``, or None when no single element has its name.

    ngspice prints a card lower-cased, and an element inside a subcircuit under its instance path
    ("m.x1.m7"), so the name is tried whole, then as its last dotted part; a dot statement (a ``.param``
    line) is found by its words. Two of one name (in two subcircuits) leave the card unplaced rather
    than placed at a guess.
    """
    words = card.split()
    if not words:
        return None
    if words[0].startswith("."):  # a dot statement (a .param line): the one written with these words
        places = {s.location for s in _statements(netlist.statements)
                  if isinstance(s, Directive) and s.text.lower().split() == card.lower().split()}
        return next(iter(places)) if len(places) == 1 else None
    name = words[0].lower()
    for tried in dict.fromkeys((name, name.rsplit(".", 1)[-1])):
        places = {s.location for s in _statements(netlist.statements) if isinstance(s, Element) and s.name.lower() == tried}
        if places:
            return next(iter(places)) if len(places) == 1 else None
    return None
