"""Judge ngspice's own output: which lines are real errors (notes and warnings are not)."""

from __future__ import annotations

import re
from collections.abc import Iterable

__all__ = ["ac_op_failed", "error_lines", "fatal_among", "fatal_lines", "ngspice_fallback", "op_failed", "recovery", "summary", "tail"]

# Lines ngspice prints when something really failed. Notes ("Note: Starting dynamic gmin stepping")
# and warnings ("Warning: singular matrix", "Warning: Dynamic gmin stepping failed") precede
# recoveries all the time, so they never count on their own.
_ERROR = re.compile(
    r"^\s*(error\b|fatal\b)"  # "Error: ...", "Error on line ...", "ERROR: ...", "Fatal error"
    r"|doanalyses:"  # "doAnalyses: OP:  Timestep too small; cause unrecorded."
    r"|simulation\(s\) aborted"  # "op simulation(s) aborted"
    r"|dc solution failed"
    r"|timestep too small"
    r"|no convergence"
    r"|gmin stepping failed"
    r"|singular matrix"
    r"|unknown (model|subckt|parameter|device)"
    r"|could not find",
    re.IGNORECASE,
)
_BENIGN = re.compile(r"^\s*(note:|warning:|trying gmin|supplies reduced)", re.IGNORECASE)

_OP_FAILED = re.compile(
    r"doanalyses:\s*op\b|op simulation\(s\) aborted|dc solution failed|transient op failed",
    re.IGNORECASE,
)


# What ngspice 39 prints when the operating point an ``ac`` command computes first has failed.
_AC_OP_FAILED = re.compile(r"ac operating point failed|doanalyses:\s*ac:.*frequency = 0\b", re.IGNORECASE)


# Every line _ERROR, _OP_FAILED or _AC_OP_FAILED matches holds one of these, lower-case (each alternative names one;
# tests/sim/test_output.py checks it on lines made from the patterns themselves).
_CLUES = ("error", "fatal", "doanalyses:", "aborted", "failed", "timestep too small", "no convergence", "singular matrix",
          "unknown ", "could not find")


def _quiet(lines: list[str] | tuple[str, ...]) -> bool:
    """True when none of ``lines`` can match the patterns above: ASCII text (where ignoring case is lower-casing)
    holding none of _CLUES. ngspice's usual output while it iterates (some 35 lines an ``op`` or ``ac``, gmin steps) is
    judged by a few substring searches instead of a pattern a line: 0.76 -> 0.41 ms a sky130 mismatch sample in the
    ngspice process (error_lines, op_failed, ac_op_failed and fatal_lines timed while 74 samples' recorded jobs ran)."""
    text = "\n".join(lines)
    if not text.isascii():
        return False
    text = text.lower()
    return not any(clue in text for clue in _CLUES)


def ac_op_failed(lines: Iterable[str]) -> bool:
    """True when ngspice says the operating point of an ``ac`` command failed."""
    lines = _listed(lines)
    return not _quiet(lines) and any(_AC_OP_FAILED.search(line) for line in lines)


def _listed(lines: Iterable[str]) -> list[str] | tuple[str, ...]:
    return lines if isinstance(lines, (list, tuple)) else list(lines)


def error_lines(lines: Iterable[str]) -> tuple[str, ...]:
    """The lines of ngspice output that report a real failure."""
    lines = _listed(lines)
    if _quiet(lines):
        return ()
    found = []
    for line in lines:
        text = line.strip()
        if not text or _BENIGN.match(text):
            continue
        if _ERROR.search(text):
            found.append(text)
    return tuple(found)


def op_failed(lines: Iterable[str]) -> bool:
    """True when ngspice says it found no operating point."""
    lines = _listed(lines)
    return not _quiet(lines) and any(_OP_FAILED.search(line) for line in lines)


def tail(lines: Iterable[str], count: int = 12) -> str:
    """The last ``count`` non-blank lines, for messages."""
    kept = [line.rstrip() for line in lines if line.strip()]
    return "\n".join(kept[-count:])


def summary(lines: Iterable[str], count: int = 6) -> str:
    """ngspice's distinct error lines, in order, joined for a one-line message."""
    seen: list[str] = []
    for line in error_lines(lines):
        if line not in seen:
            seen.append(line)
    return " | ".join(seen[:count])


# What ngspice 39 prints when one of its own operating-point fallbacks succeeded, and what we call it.
_FALLBACKS = (
    ("transient op finished successfully", "transient operating point"),
    ("source stepping completed", "source stepping"),
    ("spice3 gmin stepping completed", "gmin stepping ladder"),
    ("true gmin stepping completed", "true gmin stepping"),
    ("dynamic gmin stepping completed", "dynamic gmin stepping"),
)


def ngspice_fallback(lines: Iterable[str]) -> str | None:
    """'ngspice: <method>' when plain Newton failed and one of ngspice's own fallbacks found the point."""
    text = "\n".join(lines).lower()
    for marker, name in _FALLBACKS:
        if marker in text:
            return f"ngspice: {name}"
    return None


def fatal_lines(lines: Iterable[str]) -> tuple[str, ...]:
    """The error lines that are not ngspice's notes while it iterates (netloop.sim.diagnostics.numerical): an analysis
    that finished despite those recovered from them; these others (a command or netlist it refused) are failures."""
    return fatal_among(error_lines(lines))


def fatal_among(errors: tuple[str, ...]) -> tuple[str, ...]:
    """fatal_lines of output whose error_lines are ``errors``."""
    from netloop.sim.diagnostics import numerical  # noqa: PLC0415

    return tuple(line for line in errors if not numerical(line))


def recovery(lines: Iterable[str]) -> str | None:
    """How ngspice found its way through an analysis that finished after error lines: its fallback ("ngspice: true gmin
    stepping"), or "ngspice: recovered after '<the first error>'"; None when it printed no error and used no fallback."""
    lines = list(lines)
    fallback = ngspice_fallback(lines)
    if fallback is not None:
        return fallback
    errors = error_lines(lines)
    return f"ngspice: recovered after '{errors[0]}'" if errors else None
