"""What may make netloop measure another circuit than the one meant: a title line that reads as an element,
a ``.control`` block left open, a ``.control`` block that changes a source, parameter or temperature."""

from __future__ import annotations

import re
from collections.abc import Iterable

from netloop.errors import NetlistSyntaxError
from netloop.netlist.cards import ELEMENT_LETTERS, parse_card
from netloop.netlist.location import SourceLocation
from netloop.netlist.model import Directive, Element, Statement, Subcircuit

__all__ = ["control_caveats", "open_control", "title_caveat"]

_GROUND = frozenset(("0", "gnd"))


def title_caveat(title: str, source: str, statements: tuple[Statement, ...], models: Iterable[str] = ()) -> str | None:
    """A warning when the first line, which SPICE reads as the title, is an element card of this circuit: it parses as one,
    and every node it names (ground aside, at least one) is a node of the top-level circuit; else None."""
    text = title.strip()
    if not text or text[0].upper() not in ELEMENT_LETTERS:
        return None
    try:
        card = parse_card(text, SourceLocation(source, 1), models)
    except NetlistSyntaxError:
        return None
    own = [n for n in card.nodes if n not in _GROUND]
    if not own:
        return None
    nodes = {n for s in statements if isinstance(s, Element) for n in s.nodes}
    if not all(n in nodes for n in own):
        return None
    return (f"{source}:1: the first line reads as an element ({text}), but SPICE takes the first line of a netlist as its title: "
            f"{card.name} is NOT in the circuit netloop measures; put a title line above it")


def open_control(block: Directive) -> str | None:
    """A warning for a ``.control`` block with no ``.endc``: every line after it was read into the block, none into the circuit."""
    lines = [ln for ln in block.text.splitlines() if ln.strip()]
    if len(lines) > 1 and lines[-1].strip()[:5].lower() == ".endc":
        return None
    return (f"{block.location.file}:{block.location.line}: .control has no .endc: the {len(lines) - 1} line(s) after it, to the "
            "end of the file, were read as part of the block and are not in the circuit; close the block with .endc")


# a command of a .control block that changes the circuit: (pattern, what it changes)
_DEVICE = r"@?([^\s\[=@]+)"
_COMMANDS = (
    (re.compile(rf"^alter\s+{_DEVICE}", re.I), "device"),
    (re.compile(rf"^let\s+@([^\s\[=]+)\s*\[", re.I), "device"),
    (re.compile(rf"^altermod\s+{_DEVICE}", re.I), "model"),
    (re.compile(r"^alterparam\s+(?:\S+\s+)?([^\s=]+)\s*=", re.I), "parameter"),
    (re.compile(r"^(?:set|options?)\s+(?:\S+\s*=\s*\S+\s+)*(temp)\s*=", re.I), "temperature"),
)


def _uses(statements: tuple[Statement, ...]) -> tuple[dict[str, Element], set[str], set[str]]:
    """Elements by lower-case name (top level first, then inside definitions), model names and parameter names."""
    elements: dict[str, Element] = {}
    models: set[str] = set()
    params: set[str] = set()
    stack = [statements]
    while stack:
        for s in stack.pop(0):
            if isinstance(s, Element):
                elements.setdefault(s.key, s)
            elif isinstance(s, Subcircuit):
                params.update(k for k, _ in s.params)
                stack.append(s.body)
            elif s.keyword == ".model":
                models.update(s.text.split()[1:2])
            elif s.keyword == ".param":
                params.update(k.strip().lower() for k in re.findall(r"([A-Za-z_][\w.]*)\s*=", s.text[6:]))
    return elements, {m.lower() for m in models}, params


def control_caveats(blocks: Iterable[Directive], statements: tuple[Statement, ...]) -> tuple[str, ...]:
    """One warning per command of an ignored ``.control`` block that changes a source, device, model, parameter or the
    temperature the circuit uses (alter, altermod, alterparam, let @dev[...], set/option temp): netloop never runs the
    block, so the verdict is for the circuit as its netlist lines give it."""
    out: list[str] = []
    uses = None
    for block in blocks:
        if block.keyword != ".control":
            continue
        for offset, raw in enumerate(block.text.splitlines()):
            command = raw.strip()
            for pattern, kind in _COMMANDS:
                m = pattern.match(command)
                if m is None:
                    continue
                uses = uses or _uses(statements)
                target = m.group(1).lower()
                what = _changed(kind, target, uses)
                if what is not None:
                    where = f"{block.location.file}:{block.location.line + offset}"
                    out.append(f"{where}: '{command}' in the .control block changes {what}, but netloop does not run .control "
                               "blocks: it measures the netlist's own value (put the value in the netlist to measure with it)")
                break
    return tuple(out)


def _changed(kind: str, target: str, uses: tuple[dict[str, Element], set[str], set[str]]) -> str | None:
    """What the circuit uses of a command's target, in words (with the card that sets it), or None when it uses nothing of it."""
    elements, models, params = uses
    if kind == "temperature":
        return "the temperature"
    if kind == "model":
        return f"model {target}, which the circuit uses" if target in models else None
    if kind == "parameter":
        return f"parameter {target}, which the netlist sets with .param" if target in params else None
    el = elements.get(target)
    if el is None and "." in target:  # a flattened name such as m.x1.m3: the element inside its definition
        el = elements.get(target.rsplit(".", 1)[-1])
    if el is None:
        return None
    noun = "source" if el.kind in "VI" else "element"
    return f"{noun} {el.name} ({el.card()} at {el.location.file}:{el.location.line})"
