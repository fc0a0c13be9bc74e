"""ngspice's own diagnosis, read from its output, in sentences that lead netloop's messages.

ngspice names the real cause of a failure a few lines before the generic line a failure ends with
("Undefined parameter [rval]" before "cannot recover and awaits to be detached"; "singular
matrix: check node fl1" before "Too many iterations"). The texts below are those of ngspice 39
(checked against real runs of small decks in tests/sim/test_diagnostics.py):

    Netlist line no. 3: / Undefined parameter [rval]         a {rval} with no .param rval
    Warning: singular matrix:  check node fl1                a node without a DC path to ground
    Warning: singular matrix:  check node v1#branch          ideal voltage sources in parallel (or a loop of
                                                             them and inductors): the branch current is free
    Error: unknown subckt: x1 a b nosub                      an instance of a subcircuit never defined
    warning, can't find model 'nosuch' from line / d1 ...    a device of a model never defined
    Warning: Model issue on line 5 : / .model ... /          a model parameter ngspice does not know,
      unrecognized parameter (cox) - ignored                 ignored (not an error: a warning to pass on)
    Error: -0.3 out of range for sqrt / in line b1           a behavioural expression outside its domain
    Error on line 8 or its substitute: / m7 a b c pch /      a card ngspice refused (too few nodes, a parameter
      not enough nodes                                       the device does not have), the card and the reason
    Error on line: / r.x1.r6 a b 2k q=4 / unknown parameter  the same for a card inside a subcircuit
    Netlist line no. 15: / Closing "}" not found.            a line ngspice could not read (an unbalanced brace)

``diagnose`` gives the causes of a failure (``structural`` when no convergence aid can help, ``card`` the netlist line
ngspice blamed, as it printed it, so that the jobs above can say where that line is in the user's files);
``model_warnings`` the things ngspice ignored and went on, which belong in a result's warnings.
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from dataclasses import dataclass

__all__ = ["Diagnosis", "diagnose", "model_warnings", "numerical"]


@dataclass(frozen=True, slots=True)
class Diagnosis:
    """One cause ngspice named: a sentence for the user, and whether convergence aids could help at all."""

    text: str
    structural: bool
    card: str = ""  # the netlist line ngspice named (as it printed it), or "" when it named none


_UNDEFINED = re.compile(r"undefined parameter \[([^\]]+)\]", re.I)
_LINE_NO = re.compile(r"netlist line no\.\s*(\d+)", re.I)
_SINGULAR = re.compile(r"singular matrix:\s*check node\s+(\S+)", re.I)
_UNKNOWN_SUBCKT = re.compile(r"unknown subckt:\s*(\S+)(.*)", re.I)
_NO_MODEL = re.compile(r"can't find model '([^']+)'", re.I)
_UNRECOGNIZED = re.compile(r"unrecognized parameter \(([^)]+)\)\s*-\s*ignored", re.I)
_MODEL_LINE = re.compile(r"^\s*\.model\s+(\S+)", re.I)
_DOMAIN = re.compile(r"(\S+) out of range for (\S+)", re.I)
_IN_LINE = re.compile(r"^\s*in line\s+(\S+)", re.I)
_REFUSED_CARD = re.compile(r"error on line(?: \d+ or its substitute)?:\s*$", re.I)  # "Error on line:" in a subcircuit
# what ngspice prints after the card or line it refused, that is no reason of its own
_NO_REASON = re.compile(r"^\s*$|^\s*(error:|please check your input|netlist line no\.)", re.I)
# what ngspice prints while it iterates; with the analysis finished regardless, they were recovered from
_NUMERICAL = re.compile(r"out of range for|singular matrix|timestep too small|gmin stepping failed|source stepping failed"
                        r"|no convergence|iteration limit|too many iterations", re.I)


def numerical(line: str) -> bool:
    """Whether an error line is one ngspice prints while it iterates toward a solution (and may recover from)."""
    return bool(_NUMERICAL.search(line))


def _deck_line(deck: str, number: int) -> str:
    lines = deck.splitlines()
    return lines[number - 1].strip() if 0 < number <= len(lines) else ""


def _branch(node: str) -> str:
    """ "v1#branch" -> "voltage source v1"; "l3#branch" -> "inductor l3"."""
    name = node.split("#", 1)[0]
    kind = {"v": "voltage source", "l": "inductor", "e": "voltage-controlled source", "h": "current-controlled source"}
    return f"{kind.get(name[:1].lower(), 'element')} {name}"


def diagnose(lines: Iterable[str], deck: str = "") -> tuple[Diagnosis, ...]:
    """The causes ngspice named in its output, first seen first, each once (``deck`` lets a line number be shown as its text)."""
    lines = list(lines)
    found: dict[str, Diagnosis] = {}

    def add(text: str, structural: bool, key: str = "", card: str = "") -> None:
        found.setdefault(key or text, Diagnosis(text, structural, card))

    def reason(at: int) -> str:
        """The line ngspice printed at ``at`` as the reason for a refusal, or "" when it is none."""
        return lines[at].strip() if at < len(lines) and not _NO_REASON.search(lines[at]) else ""

    for i, line in enumerate(lines):
        if m := _UNDEFINED.search(line):
            where, card = "", ""
            for previous in reversed(lines[max(0, i - 2):i]):
                if n := _LINE_NO.search(previous):
                    card = _deck_line(deck, int(n.group(1)))
                    where = f" (used in '{card}')" if card else ""
                    break
            add(f"undefined parameter '{m.group(1)}'{where}: no .param defines it", True, card=card)
        elif _REFUSED_CARD.search(line):
            card = lines[i + 1].strip() if i + 1 < len(lines) else ""
            why = reason(i + 2)
            if card:
                add(f"ngspice refused the line '{card}'" + (f": {why}" if why else ""), True, card=card)
        elif (n := _LINE_NO.search(line)) and (why := reason(i + 1)) and not _UNDEFINED.search(why):
            card = _deck_line(deck, int(n.group(1)))
            if card and not any(d.card == card for d in found.values()):  # a line already blamed (an undefined parameter)
                add(f"ngspice could not read the line '{card}': {why}", True, key=f"line {card}", card=card)
        elif m := _SINGULAR.search(line):
            node = m.group(1)
            if "#branch" in node.lower():
                add(f"singular matrix: the current of {_branch(node)} is not determined; two ideal voltage sources in "
                    "parallel (or a loop of voltage sources and inductors) fix the same voltage: remove one or add a "
                    "series resistance", True)
            else:
                add(f"singular matrix at node '{node}': it has no DC path to ground (a floating node, or one reached "
                    "only through capacitors or current sources); give it one, e.g. a large resistor to ground", True)
        elif m := _UNKNOWN_SUBCKT.search(line):
            card = (m.group(1) + m.group(2)).strip()
            add(f"unknown subcircuit in '{card}': no .subckt of that name is defined or included", True, card=card)
        elif m := _NO_MODEL.search(line):
            following = lines[i + 1].strip() if i + 1 < len(lines) else ""
            add(f"model '{m.group(1)}' is not defined" + (f" (used by '{following}')" if following else "")
                + ": include its library or define the .model", True, card=following)
        elif m := _DOMAIN.search(line):
            following = lines[i + 1] if i + 1 < len(lines) else ""
            where = f" in {n.group(1)}" if (n := _IN_LINE.match(following)) else ""
            add(f"a behavioural expression{where} was evaluated outside its domain ({m.group(2)} of {m.group(1)})", False,
                key=f"domain {where} {m.group(2)}")
    return tuple(found.values())


def model_warnings(log: str) -> tuple[str, ...]:
    """What ngspice ignored and went on without, from its output ``log``: unrecognized model parameters, each once, with
    its .model. Nearly every log holds no such word, and is not split into lines (a sky130 sample's two logs of 4 to 10
    kB: SimResult.warnings 0.079 -> 0.036 ms a sample, timed in place while 77 samples ran through the corner worker's
    run_task, medians of 4 runs taken in turns)."""
    if "unrecognized" not in log.lower():
        return ()
    lines = log.splitlines()
    out: dict[str, None] = {}
    for i, line in enumerate(lines):
        if m := _UNRECOGNIZED.search(line):
            model = next((mm.group(1) for prev in reversed(lines[max(0, i - 2):i]) if (mm := _MODEL_LINE.match(prev))), "")
            of = f" of model '{model}'" if model else ""
            out[f"ngspice ignored the unrecognized parameter '{m.group(1)}'{of}: check the model card (or the "
                "level it selects)"] = None
    return tuple(out)
