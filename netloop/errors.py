"""Every error netloop raises, under one root so that callers catch one thing.

    NetloopError
    ├─ NetlistError ─ NetlistSyntaxError(ValueError)   file:line:col + caret context
    │               └ UnknownNodeError(KeyError)       suggests close names (difflib)
    ├─ ProbeError                                      cannot break there, and why
    ├─ SimulationError                                 deck path, simulator output, corner
    │  └─ SimulatorUnavailableError                    how to install ngspice
    ├─ AnalysisError                                   malformed data (not "no crossover")
    ├─ PlanError(ValueError)                           a corner plan or requirement that cannot be read
    ├─ OutputError(ValueError)                         a report file that cannot be written (format, path)
    └─ ResultsError(ValueError)                        a results file of a corner run that cannot be read (file:line)

The CLI catches NetloopError at the boundary, prints ``str(error)`` (one clear message)
and exits with status 2. A traceback reaching a user is a bug.

Interrupted(KeyboardInterrupt), outside that tree, is a run stopped by Ctrl-C after keeping what it had finished; the
CLI prints what it says and exits with status 130, as for any Ctrl-C.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable
from typing import Protocol

__all__ = [
    "AnalysisError",
    "in_netlist",
    "Interrupted",
    "NetlistError",
    "NetlistSyntaxError",
    "NetloopError",
    "OutputError",
    "PlanError",
    "ProbeError",
    "ResultsError",
    "SimulationError",
    "SimulatorUnavailableError",
    "UnknownNodeError",
]


class Located(Protocol):
    """Where something is in a file (netloop.netlist.SourceLocation prints as file:line:col); errors sits below every stage, so it names no stage's type."""

    column: int


class Interrupted(KeyboardInterrupt):
    """A run stopped by Ctrl-C once the work in progress had finished and been kept; str() says what was kept and how to
    go on. A KeyboardInterrupt, so that what catches Exception lets it through."""


class NetloopError(Exception):
    """Root of every error netloop raises on purpose."""


class NetlistError(NetloopError):
    """The netlist cannot be read or does not contain what was asked for."""


class NetlistSyntaxError(NetlistError, ValueError):
    """A malformed netlist line: says where, shows the line and a caret, and what was expected."""

    def __init__(self, message: str, location: Located | None = None, source_line: str | None = None):
        self.message = message
        self.location = location
        self.source_line = source_line
        super().__init__(self._render())

    def _render(self) -> str:
        if self.location is None:
            return self.message
        head = f"{self.location}: {self.message}"
        if not self.source_line:
            return head
        line = self.source_line.rstrip("\n")
        column = max(self.location.column - 1, 0)
        if len(line) > _SHOWN:  # a window around the caret
            start = max(0, min(column - _SHOWN // 2, len(line) - _SHOWN))
            line, column = line[start : start + _SHOWN], column - start
        # bytes a terminal would act on (escape sequences, bells, binary junk) are shown as '?', one for one
        line = "".join(ch if ch.isprintable() or ch == "\t" else "?" for ch in line)
        return f"{head}\n    {line}\n    {' ' * column}^"


_SHOWN = 160  # characters of a netlist line an error shows


class UnknownNodeError(NetlistError, KeyError):
    """A node, element or subcircuit name that the netlist does not have; suggests close names."""

    def __init__(self, kind: str, name: str, known: Iterable[str] = (), where: str | None = None):
        self.kind = kind
        self.name = name
        self.where = where  # the netlist the name was looked up in, when known
        self.suggestions = tuple(difflib.get_close_matches(name.lower(), [k.lower() for k in known], n=3, cutoff=0.6))
        super().__init__(self._render())

    def in_netlist(self, where: str) -> UnknownNodeError:
        """The same error, saying which netlist was searched."""
        located = UnknownNodeError(self.kind, self.name, where=where)
        located.suggestions = self.suggestions
        located.args = (located._render(),)
        return located

    def _render(self) -> str:
        msg = f"{self.where}: " if self.where else ""
        msg += f"unknown {self.kind} {self.name!r}"
        if self.suggestions:
            msg += "; did you mean " + " or ".join(repr(s) for s in self.suggestions) + "?"
        return msg

    def __str__(self) -> str:  # KeyError would otherwise quote the message
        return self._render()


class ProbeError(NetloopError):
    """The loop cannot be broken at the requested place; the message says why."""

    def in_netlist(self, where: str) -> ProbeError:
        """The same error, its message prefixed by the netlist it concerns."""
        text = str(self)
        return self if text.startswith(f"{where}: ") else ProbeError(f"{where}: {text}")


class SimulationError(NetloopError):
    """ngspice failed. Carries the kept deck's path and ngspice's own message."""

    def __init__(self, message: str, deck_path: str | None = None, simulator_output: str = "", corner: str | None = None,
                 log_path: str | None = None, cards: tuple[str, ...] = ()):
        self.message = message
        self.deck_path = deck_path
        self.simulator_output = simulator_output
        self.corner = corner
        self.log_path = log_path  # ngspice's whole output, kept beside the deck
        self.cards = cards  # the netlist lines ngspice blamed, as it printed them (the jobs say where they are)
        parts = [f"[{corner}] {message}" if corner else message]
        if deck_path:
            parts.append(f"deck kept at {deck_path}" + (f" (ngspice's whole output: {log_path})" if log_path else ""))
        super().__init__("; ".join(parts))


class SimulatorUnavailableError(SimulationError):
    """No usable ngspice: neither the shared library nor the batch binary."""

    def __init__(self, message: str = ""):
        hint = (
            "ngspice is not available; on Debian or Ubuntu install it with "
            "'sudo apt-get install ngspice libngspice0 libngspice0-dev' (or run 'make demo', which does it)"
        )
        self.reason = message  # what failed, without the hint (a caller that gathers several failures adds the hint once)
        super().__init__(f"{message}; {hint}" if message else hint)


class AnalysisError(NetloopError):
    """Frequency-response data that cannot be analysed (wrong shape, unsorted, empty)."""


class PlanError(NetloopError, ValueError):
    """A corner plan or a requirement expression that cannot be read; says file:line where it applies."""


class OutputError(NetloopError, ValueError):
    """A report, plot or data file that cannot be written: an unknown format or a path that cannot be opened."""


class ResultsError(NetloopError, ValueError):
    """A results file of a corner run (a baseline, a trend) that cannot be read; says file:line where it applies."""


def in_netlist(exc: NetloopError, where: str) -> NetloopError:
    """``exc`` naming the netlist it concerns (unknown names and probe refusals), else ``exc`` itself."""
    if not where or where.startswith("<") or not isinstance(exc, (ProbeError, UnknownNodeError)):
        return exc
    if isinstance(exc, UnknownNodeError) and exc.where:
        return exc
    return exc.in_netlist(where)
