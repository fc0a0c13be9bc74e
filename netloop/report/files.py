"""Writing report files: an OSError (missing folder, no permission) becomes one clear OutputError."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from netloop.errors import OutputError

__all__ = ["output_file", "refuse_unwritable", "tagged_path"]


@contextmanager
def output_file(path: str | Path, what: str) -> Iterator[Path]:
    """Context for writing `what` ("Bode plot", "CSV samples") to path; OSError inside -> OutputError saying where and why."""
    path = Path(path)
    try:
        yield path
    except OSError as exc:
        reason = exc.strerror or str(exc)
        raise OutputError(f"cannot write the {what} to {str(path)!r}: {reason}") from exc


def refuse_unwritable(path: str | Path | None, what: str) -> None:
    """OutputError now (before any long work) when ``path``'s folder is missing or is not a folder, or when ``path`` is
    itself a folder (a file can never be written there: it would fail only once the work is done); None passes."""
    if path is None:
        return
    if Path(path).is_dir():
        raise OutputError(f"cannot write the {what} to {str(path)!r}: Is a directory")
    folder = Path(path).parent
    if not folder.is_dir():
        reason = "Not a directory" if folder.exists() else "No such file or directory"
        raise OutputError(f"cannot write the {what} to {str(path)!r}: {reason} ({str(folder)!r})")


def tagged_path(path: str | Path, tag: str) -> str:
    """FILE.ext -> FILE-tag.ext, and FILE -> FILE-tag: where a file written beside ``path`` goes (a loop's samples, the
    Nyquist plot, the yield scatter). The tag goes before the file name's own extension, never into a folder whose name
    holds a dot (runs/2026.12/t -> runs/2026.12/t-tag)."""
    p = Path(path)
    return str(p.with_name(f"{p.stem}-{tag}{p.suffix}"))
