"""A plain one-line progress bar (30 cells unless told) on stderr: done/total, failures, circuit loads, elapsed time and an estimate of what is left."""

from __future__ import annotations

import sys
import time
from typing import TextIO

__all__ = ["Progress"]


class Progress:
    """Redraws one line with a carriage return; silent unless ``enabled``."""

    def __init__(self, total: int, *, enabled: bool, stream: TextIO | None = None, width: int = 30, noun: str = "corners"):
        self.total = total
        self.noun = noun  # what is counted: "corners", "samples"
        self.enabled = enabled
        self.stream = stream if stream is not None else sys.stderr
        self.width = width
        self.done = 0
        self.bad = 0
        self.loads = 0  # times ngspice read a netlist for the corners done now
        self.shared = 0  # corners done now on a circuit another corner loaded
        self.started = time.monotonic()

    def advance(self, bad: bool, loads: int | None = None) -> None:
        """One more corner done; ``loads``: how often ngspice read its netlist (0: it shared a loaded circuit)."""
        self.done += 1
        self.bad += bool(bad)
        if loads is not None:
            self.loads += loads
            self.shared += loads == 0
        self.draw()

    def draw(self) -> None:
        if not self.enabled:
            return
        frac = self.done / self.total if self.total else 1.0
        filled = int(round(frac * self.width))
        elapsed = time.monotonic() - self.started
        left = elapsed / self.done * (self.total - self.done) if self.done else None
        eta = f", about {left:.0f} s left" if left is not None and self.done < self.total else ""
        shared = f", {self.loads} loads ({self.shared} {self.noun} on a loaded circuit)" if self.loads or self.shared else ""
        line = f"\r[{'#' * filled}{'.' * (self.width - filled)}] {self.done}/{self.total} {self.noun}, {self.bad} failed{shared}, {elapsed:.0f} s{eta}"
        self.stream.write(line.ljust(80))
        self.stream.flush()

    def finish(self) -> None:
        if self.enabled:
            self.stream.write("\n")
            self.stream.flush()
