"""Stray AC sources: set the AC magnitude of every independent source to zero, DC and transient untouched."""

from __future__ import annotations

import re
from dataclasses import replace

from netloop.netlist.model import Element, Statement, Subcircuit

__all__ = ["silence_element", "silence_statements"]

_NUMERIC = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?[a-zA-Z]*$")
_ZERO = re.compile(r"^[+-]?(0+\.?0*|\.0+)([eE][+-]?\d+)?[a-zA-Z]*$")


def _is_value(tok: str) -> bool:
    return bool(_NUMERIC.match(tok)) or tok.startswith(("{", "'"))


def silence_element(e: Element) -> Element | None:
    """The source with its ``ac MAG [PHASE]`` part replaced by ``ac 0``, or None when it has no AC part."""
    if e.name[0].upper() not in "VI":  # e.kind, without the call: this runs over every element
        return None
    toks = list(e.tokens)
    first = max(e.node_slots, default=-1) + 1
    for i in range(first, len(toks)):
        low = toks[i].lower()
        if low.startswith("ac="):
            mag = toks[i][3:]
            if _ZERO.match(mag):
                return None
            toks[i] = "ac=0"
            return replace(e, tokens=tuple(toks))
        if low != "ac":
            continue
        if i + 1 >= len(toks) or not _is_value(toks[i + 1]):
            toks[i:i + 1] = ["ac", "0"]  # "ac" without a magnitude is AC 1 in ngspice
            return replace(e, tokens=tuple(toks))
        end = i + 2
        if end < len(toks) and _is_value(toks[end]):
            end += 1
        if _ZERO.match(toks[i + 1]):
            return None
        toks[i:end] = ["ac", "0"]
        return replace(e, tokens=tuple(toks))
    return None


def silence_statements(statements: tuple[Statement, ...], keep: frozenset[str], where: str = "") -> tuple[tuple[Statement, ...], tuple[tuple[str, str], ...]]:
    """Silence every independent source in a body and its nested subcircuits.

    Returns the new statements and ``(container, element key)`` pairs of what was silenced
    (container "" is the top level, else the subcircuit name). ``keep`` names top-level sources to leave alone.
    """
    out: list[Statement] = []
    hits: list[tuple[str, str]] = []
    for s in statements:
        kind = type(s)
        if kind is Element:
            # only V and I lines can be silenced: the test on the first letter spares the call on every other element
            new = None if s.name[0] not in "vViI" or (keep and where == "" and s.key in keep) else silence_element(s)
            if new is not None:
                hits.append((where, s.key))
                out.append(new)
            else:
                out.append(s)
        elif kind is Subcircuit:
            body, inner = silence_statements(s.body, frozenset(), s.name)
            hits.extend(inner)
            out.append(replace(s, body=body) if inner else s)
        else:
            out.append(s)
    return tuple(out), tuple(hits)
