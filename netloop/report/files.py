"""Writing report files: an OSError (missing folder, no permission) becomes one clear OutputError."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from netloop.errors import OutputError

__all__ = ["output_file"]


@contextmanager
def output_file(path: str | Path, what: str) -> Iterator[Path]:
    """Context for writing `what` ("Bode plot", "CSV samples") to path; OSError inside -> OutputError saying where and why."""
    path = Path(path)
    try:
        yield path
    except OSError as exc:
        reason = exc.strerror or str(exc)
        raise OutputError(f"cannot write the {what} to {str(path)!r}: {reason}") from exc
