"""One element card to an ``Element``: which tokens are nodes, and what role each plays, by element letter."""

from __future__ import annotations

import re
from collections.abc import Collection

from netloop.errors import NetlistSyntaxError
from netloop.netlist.lines import token_columns, tokenize
from netloop.netlist.location import SourceLocation
from netloop.netlist.model import Element
from netloop.netlist.values import looks_numeric

__all__ = ["ELEMENT_LETTERS", "MOS_NEEDS", "MOS_PINS", "controlling_sources", "expression_references", "parse_card", "resolve_bjt",
           "resolve_mos", "two_terminal"]

MOS_NEEDS = "4 nodes and a model (3, or 5 with the thermal nodes, for a vdmos model)"
# Fixed-arity elements: (pin roles, minimum token count after the name, what the card needs).
_FIXED: dict[str, tuple[tuple[str, ...], int, str]] = {
    "R": (("p", "n"), 3, "2 nodes and a value"),
    "C": (("p", "n"), 3, "2 nodes and a value"),
    "L": (("p", "n"), 3, "2 nodes and a value"),
    "V": (("p", "n"), 2, "2 nodes"),
    "I": (("p", "n"), 2, "2 nodes"),
    "B": (("p", "n"), 3, "2 nodes and an expression"),
    "D": (("p", "n"), 3, "2 nodes and a model"),
    "M": (("d", "g", "s", "b"), 4, MOS_NEEDS),
    "J": (("d", "g", "s"), 4, "3 nodes and a model"),
    "Z": (("d", "g", "s"), 4, "3 nodes and a model"),
    "S": (("p", "n", "cp", "cn"), 5, "4 nodes and a model"),
    "W": (("p", "n"), 4, "2 nodes, a controlling source and a model"),
    "T": (("p1", "n1", "p2", "n2"), 4, "4 nodes"),
    "O": (("p1", "n1", "p2", "n2"), 5, "4 nodes and a model"),
    "U": (("p", "n", "g"), 4, "3 nodes and a model"),
    "F": (("p", "n"), 4, "2 nodes, a controlling source and a gain"),
    "H": (("p", "n"), 4, "2 nodes, a controlling source and a gain"),
    "K": ((), 3, "2 inductors and a coupling factor"),
}
# Which token (after the name) holds the model name.
_MODEL_AT = {"D": 2, "M": 4, "J": 3, "Z": 3, "S": 4, "W": 3, "O": 4, "U": 3}

ELEMENT_LETTERS = frozenset("RCLKVIEFGHBDMQJZSWTOUXA")


def _two_terminal_constructor():
    """Build records by setting the slots of the frozen dataclasses directly.

    Same records as ``Element(...)`` and ``SourceLocation(...)``, made about a third faster,
    which matters for million-element netlists.
    """
    e_set = tuple(Element.__dict__[f].__set__ for f in ("name", "tokens", "node_slots", "pins", "location", "model", "_nodes"))
    l_set = tuple(SourceLocation.__dict__[f].__set__ for f in ("file", "line", "column"))
    new = object.__new__
    s0, s1, s2, s3, s4, s5, s6 = e_set
    f0, f1, f2 = l_set
    slots, pins = (0, 1), ("p", "n")

    def two_terminal(toks: list[str], file: str, line: int) -> Element:
        """``Element`` for a plain "R1 a b 1k"-style card already split (at least 4 tokens)."""
        loc = new(SourceLocation)
        f0(loc, file)
        f1(loc, line)
        f2(loc, 1)
        o = new(Element)
        s0(o, toks[0])
        a, b = toks[1].lower(), toks[2].lower()
        s1(o, (a, b, toks[3]) if len(toks) == 4 else (a, b, *toks[3:]))
        s2(o, slots)
        s3(o, pins)
        s4(o, loc)
        s5(o, None)
        s6(o, (a, b))  # Element.nodes, known here (else computed on first use)
        return o

    return two_terminal


two_terminal = _two_terminal_constructor()


def _fail(what: str, text: str, loc: SourceLocation, col: int | None = None) -> NetlistSyntaxError:
    if col is None:
        col = len(text.rstrip()) + 2
    return NetlistSyntaxError(what, SourceLocation(loc.file, loc.line, col), text)


def _column(text: str, rest: tuple[str, ...], i: int) -> int:
    """The 1-based column in ``text`` (a card: its name, then ``rest``) where ``rest[i]`` starts, for an error's caret. Each
    token is looked for as a whole word after the one before it, so that the column stays right where the tokenizer's
    tokens are not the text's pieces: an XSPICE card's brackets ("[a b]" is four tokens), a "w = 2" read as one. A
    token the tokenizer rewrote is passed over; the one sought, if not found as written, starts at the next piece."""
    at = len(text.split(None, 1)[0]) if text.strip() else 0  # past the element's name
    at += len(text) - len(text.lstrip())
    for k, tok in enumerate(rest[:i + 1]):
        found = re.compile(rf"(?<![^\s\[\]]){re.escape(tok)}(?![^\s\[\]])").search(text, at)
        if found:
            if k == i:
                return found.start() + 1
            at = found.end()
    columns = [c for c in token_columns(text) if c > at]
    return columns[0] if columns else len(text.rstrip()) + 2


def _poly_order(tok: str) -> int | None:
    """n of a ``POLY(n)`` token; None for anything else, such as a node named poly2 (ngspice 39 reads
    ``E1 o 0 poly2 0 10`` as a linear source controlled by the node poly2)."""
    t = tok.lower()
    if not (t.startswith("poly(") and t.endswith(")")):
        return None
    digits = t[5:-1]
    return int(digits) if digits.isdigit() else None


def resolve_bjt(tokens: tuple[str, ...] | list[str], models: Collection[str]) -> int:
    """How many nodes a Q card has: 3 when token 4 is a known model name, else 4 when a 5th name follows."""
    if len(tokens) < 4:
        return 3
    if tokens[3].lower() in models:
        return 3
    if len(tokens) >= 5 and "=" not in tokens[4] and not looks_numeric(tokens[4]) and tokens[4][0] not in "{'":
        return 4
    return 3


MOS_PINS = {3: ("d", "g", "s"), 4: ("d", "g", "s", "b"), 5: ("d", "g", "s", "tj", "tc")}  # by node count (resolve_mos)


def resolve_mos(tokens: tuple[str, ...] | list[str], vdmos: Collection[str]) -> int:
    """How many nodes an M card has: 3 (d g s) or 5 (d g s tj tc, the thermal nodes) when the model there is a vdmos
    model (ngspice manual, VDMOS: "Mxxx nd ng ns [tj tc] mname"), else 4 (d g s b); 3 when the card has only 4 tokens."""
    if len(tokens) < 5:
        return 3
    if tokens[3].lower() in vdmos:
        return 3
    if len(tokens) >= 6 and tokens[5].lower() in vdmos:
        return 5
    return 4


def _xspice_slots(toks: list[str]) -> list[int]:
    slots = []
    for i, t in enumerate(toks[:-1]):
        if t in ("[", "]") or t.startswith("%") or "=" in t:
            continue
        slots.append(i)
    return slots


def parse_card(text: str, loc: SourceLocation, models: Collection[str] = (), vdmos: Collection[str] = ()) -> Element:
    """Parse one element statement (continuations already joined) into an ``Element``; ``models`` are the model names
    defined so far, ``vdmos`` those of type vdmos (resolve_bjt, resolve_mos: a card before its model is resolved later)."""
    toks = tokenize(text)
    name = toks[0]
    kind = name[0].upper()
    rest = toks[1:]
    if kind not in ELEMENT_LETTERS:
        raise _fail(f"unknown element type {name[0]!r}: expected one of R C L K V I E F G H B D M Q J Z S W T O U X A", text, loc, loc.column)
    n = len(rest)
    model = None
    if kind in _FIXED:
        pins, need, what = _FIXED[kind]
        if n < need:
            raise _fail(f"{name}: expected {what}", text, loc)
        if kind == "M":
            count = resolve_mos(rest, vdmos)
            pins = MOS_PINS[count]
        slots = tuple(range(len(pins)))
        at = len(pins) if kind == "M" else _MODEL_AT.get(kind)
        if at is not None:
            model = rest[at].lower()
        elif kind in "FH":
            order = _poly_order(rest[2])
            if order is not None and n < 4 + order:  # ngspice 39 refuses a POLY card without coefficients too
                raise _fail(f"{name}: expected {order} controlling sources and the coefficients after {rest[2]}", text, loc)
    elif kind in "EG":
        if n < 3:
            raise _fail(f"{name}: expected 2 output nodes and a gain, POLY(n), VALUE= or TABLE form", text, loc)
        third = rest[2].lower()
        order = _poly_order(third)
        if order is not None:
            if n < 4 + 2 * order:  # ngspice 39 refuses a POLY card without coefficients too
                raise _fail(f"{name}: expected {2 * order} controlling nodes and the coefficients after {rest[2]}", text, loc)
            slots = (0, 1, *range(3, 3 + 2 * order))
            pins = ("p", "n", *(f"{r}{k}" for k in range(1, order + 1) for r in ("cp", "cn")))
        elif "=" in third or third.startswith(("value", "table", "laplace", "freq", "vol", "cur", "{", "'")):
            slots, pins = (0, 1), ("p", "n")
        else:
            if n < 5:
                raise _fail(f"{name}: expected 2 output nodes, 2 controlling nodes and a gain", text, loc)
            slots, pins = (0, 1, 2, 3), ("p", "n", "cp", "cn")
    elif kind == "Q":
        if n < 4:
            raise _fail(f"{name}: expected 3 or 4 nodes and a model", text, loc)
        count = resolve_bjt(rest, models)
        if count == 3:
            slots, pins = (0, 1, 2), ("c", "b", "e")
        else:
            slots, pins = (0, 1, 2, 3), ("c", "b", "e", "sub")
        model = rest[count].lower()
    elif kind == "X":
        end = n
        for i, t in enumerate(rest):
            if t.lower() == "params:":
                end = i
                break
        while end > 0 and "=" in rest[end - 1]:
            end -= 1
        if end == 0:
            raise _fail(f"{name}: expected nodes and a subcircuit name", text, loc)
        model = rest[end - 1].lower()
        # key=value tokens may also stand between the nodes and the name (as sky130's cells write)
        slots = tuple(i for i in range(end - 1) if "=" not in rest[i])
        pins = tuple(str(i + 1) for i in slots)  # replaced by the definition's pin names once known
    else:  # "A": XSPICE code model, nodes best effort
        if "[" in text or "]" in text:
            rest = tokenize(text.replace("[", " [ ").replace("]", " ] "))[1:]
            n = len(rest)
        if n < 2:
            raise _fail(f"{name}: expected connections and a model", text, loc)
        model = rest[-1].lower()
        slots = tuple(_xspice_slots(rest))
        pins = tuple(f"a{i + 1}" for i in range(len(slots)))
    given = tuple(rest)  # as written: the loop below lower-cases the nodes in place
    for i in slots:
        t = rest[i]
        if "=" in t or t[0] in "{'":
            raise _fail(f"{name}: expected a node name, got {t!r}", text, loc, _column(text, given, i))
        if not t.isascii():
            raise _fail(f"{name}: node {t!r} has characters outside ASCII, which ngspice cannot name in its output; rename "
                        "it with ASCII letters, digits and _", text, loc, _column(text, given, i))
        low = t.lower()
        if low != t:
            rest[i] = low
    return Element(name, tuple(rest), slots, pins, loc, model)


# v(node) or v(node, node) and i(source) inside a behavioural expression
_VOLTAGE_REFERENCE = re.compile(r"\bv\(\s*([^,()\s]+)\s*(?:,\s*([^()\s]+)\s*)?\)", re.IGNORECASE)
_CURRENT_REFERENCE = re.compile(r"\bi\(\s*([^()\s]+)\s*\)", re.IGNORECASE)


def expression_references(element: Element) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """(the nodes named in ``v(...)``, the sources named in ``i(...)``), lower-case and in the order written, of an E, G or B
    whose value is an expression (no controlling nodes of its own: its text after the two output nodes); ((), ()) for
    any other element. The names are as written, in the element's own scope."""
    if element.kind not in "EGB" or len(element.nodes) != 2:
        return (), ()
    text = " ".join(element.tokens[2:])
    nodes = tuple(n.lower() for m in _VOLTAGE_REFERENCE.finditer(text) for n in m.groups() if n)
    return nodes, tuple(m.group(1).lower() for m in _CURRENT_REFERENCE.finditer(text))


def controlling_sources(element: Element) -> tuple[str, ...]:
    """Names (lower-case) of the voltage sources whose current controls an F, H or W element."""
    kind = element.kind
    toks = element.tokens
    if kind == "W":
        return (toks[2].lower(),)
    if kind not in "FH":
        return ()
    order = _poly_order(toks[2])
    if order is None:
        return (toks[2].lower(),)
    return tuple(t.lower() for t in toks[3 : 3 + order])
