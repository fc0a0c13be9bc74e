"""Where a netlist statement came from: file, line and column, for messages a designer can follow."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True, slots=True)
class SourceLocation:
    """A 1-based position in a netlist file (the first physical line of a continued statement)."""

    file: str
    line: int
    column: int = 1

    def __str__(self) -> str:
        return f"{self.file}:{self.line}:{self.column}"
