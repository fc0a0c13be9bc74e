"""Where decks are kept: a user-given folder, or a fresh temporary one when a job fails."""

from __future__ import annotations

import os
import re
import tempfile
from pathlib import Path

from netloop.errors import OutputError
from netloop.sim.convergence import option_words
from netloop.sim.deck import control_steps, render_deck
from netloop.sim.job import SimJob

__all__ = ["keep_deck", "runnable_deck"]


def runnable_deck(job: SimJob, aid: str | None) -> str:
    """The deck of ``job`` as ``ngspice -b`` would run it (writing raw files next to itself)."""
    return render_deck(job, option_words(job, aid), control_steps(job, write_raw=True))


def keep_deck(text: str, label: str, keep_dir: str | os.PathLike[str] | None) -> str:
    """Write ``text`` to a new file in ``keep_dir`` (or a new temporary folder); returns its path."""
    stem = re.sub(r"[^A-Za-z0-9_.-]+", "_", label).strip("_.") or "job"
    try:
        if keep_dir is None:
            folder = Path(tempfile.mkdtemp(prefix="netloop-deck-"))
        else:
            folder = Path(keep_dir)
            folder.mkdir(parents=True, exist_ok=True)
        fd, path = tempfile.mkstemp(prefix=f"{stem}-", suffix=".cir", dir=folder)
        with os.fdopen(fd, "w", encoding="utf-8") as handle:
            handle.write(text)
    except OSError as exc:
        where = "a temporary folder" if keep_dir is None else repr(str(keep_dir))
        raise OutputError(f"cannot keep the deck in {where}: {exc.strerror or exc}") from exc
    return path
