"""A status line on a terminal's stderr: what netloop is simulating while a long check runs.

The composing modules log what they simulate to the logger "netloop" at level INFO (see
netloop.jobs.measure); on a terminal the command shows the latest message on one line, redrawn in
place, and clears it when a stage is over (a record with netloop.jobs.measure.CLEARS_STATUS) or the
command ends. Where
stderr is not a terminal (a pipe, a file, CI) nothing is shown and nothing changes.
"""

from __future__ import annotations

import contextlib
import logging
import sys
import time
from collections.abc import Iterator
from typing import TextIO

__all__ = ["StatusLine", "status_line"]

_CLEAR = "\r\033[K"  # back to the start of the line, erase it


class StatusLine(logging.Handler):
    """Writes each message over the previous one, with the seconds since the command began."""

    def __init__(self, stream: TextIO):
        super().__init__(logging.INFO)
        self.stream = stream
        self.started = time.monotonic()
        self.shown = False

    def emit(self, record: logging.LogRecord) -> None:
        try:
            if getattr(record, "clears_status", False):  # netloop.jobs.measure.CLEARS_STATUS: a stage is over
                self.clear()
                return
            message = record.getMessage()
            self.stream.write(f"{_CLEAR}netloop: {message} [{time.monotonic() - self.started:.1f} s]")
            self.stream.flush()
            self.shown = True
        except Exception:  # noqa: BLE001 - a status line must never break the command
            self.handleError(record)

    def clear(self) -> None:
        if self.shown:
            self.stream.write(_CLEAR)
            self.stream.flush()
            self.shown = False


@contextlib.contextmanager
def status_line(stream: TextIO | None = None) -> Iterator[StatusLine | None]:
    """Show the "netloop" INFO messages on ``stream`` (stderr) while the block runs, if it is a terminal."""
    stream = stream if stream is not None else sys.stderr
    try:
        terminal = stream.isatty()
    except (AttributeError, ValueError):
        terminal = False
    if not terminal:
        yield None
        return
    logger = logging.getLogger("netloop")
    handler = StatusLine(stream)
    level, propagate = logger.level, logger.propagate
    logger.addHandler(handler)
    logger.setLevel(logging.INFO)
    logger.propagate = False  # the status goes to this line only, not to any handler of the root logger
    try:
        yield handler
    finally:
        handler.clear()
        logger.removeHandler(handler)
        logger.setLevel(level)
        logger.propagate = propagate
