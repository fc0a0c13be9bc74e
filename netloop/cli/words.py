"""Messages in the words of the command line: the library's ``driver=`` becomes ``--driver`` (``--at NODE=...`` in compare)."""

from __future__ import annotations

import re
import sys
from collections.abc import Iterator
from contextlib import contextmanager

__all__ = ["command_words", "said_on_the_command_line"]

# driver= as the library says it: bare, with a quoted value on one line or a plain one, or with the ELEMENT[.PIN] pattern (a quote
# right after a bare driver= at the end of a JSON string is that string's end: a double-quoted value never spans a line
# or a comma, as the next JSON string would)
_DRIVER = re.compile(r"\bdriver=('[^'\n]*'|\"[^\"\n,]*\"|ELEMENT\[\.PIN\](?:,\.\.\.)?|[A-Za-z_][\w.]*(?:,[A-Za-z_][\w.]*)*)?")


def command_words(text: str, command: str) -> str:
    """``text`` (a warning, an error, a summary) with every ``driver=`` named as the option of ``command``:
    ``--driver m1.d`` in check (and the other commands with --driver), ``--at NODE=m1.d`` in compare."""
    option = "--at NODE=" if command == "compare" else "--driver "

    def said(m: re.Match) -> str:
        value = m.group(1)
        if value is None:
            return option + "ELEMENT" if command == "compare" else option.rstrip()
        if value[0] in "'\"":
            value = value[1:-1]
        return option + value

    return _DRIVER.sub(said, text)


class _Words:
    """A text stream that writes through command_words (every other attribute is the stream's own)."""

    def __init__(self, stream, command: str) -> None:
        self._stream = stream
        self._command = command

    def write(self, text: str) -> int:
        return self._stream.write(command_words(text, self._command))

    def __getattr__(self, name: str):
        return getattr(self._stream, name)


@contextmanager
def said_on_the_command_line(command: str) -> Iterator[None]:
    """Inside, what a command prints (results, warnings, notes) and the error it ends with name the library's options as
    that command's options (command_words); the streams are put back after."""
    out, err = sys.stdout, sys.stderr
    sys.stdout, sys.stderr = _Words(out, command), _Words(err, command)
    try:
        yield
    finally:
        sys.stdout, sys.stderr = out, err
