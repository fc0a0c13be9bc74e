"""Where decks are kept: a user-given folder, or a fresh temporary one when a job fails (with ngspice's output beside it)."""

from __future__ import annotations

import os
import re
import tempfile
from pathlib import Path

from collections.abc import Sequence

from netloop.errors import OutputError, SimulationError
from netloop.sim.convergence import op_failure, option_words
from netloop.sim.diagnostics import diagnose
from netloop.sim.output import tail
from netloop.sim.deck import control_steps, render_deck
from netloop.sim.job import SimJob

__all__ = ["job_error", "keep_deck", "keep_output", "runnable_deck"]


def runnable_deck(job: SimJob, aid: str | None) -> str:
    """The deck of ``job`` as ``ngspice -b`` would run it (writing raw files next to itself)."""
    return render_deck(job, option_words(job, aid), control_steps(job, write_raw=True))


def keep_output(deck_path: str, output: str) -> str:
    """Write ngspice's whole output beside a kept deck (``job-x.cir`` -> ``job-x.log``); returns its path."""
    path = Path(deck_path).with_suffix(".log")
    try:
        path.write_text(output if output.endswith("\n") or not output else output + "\n", encoding="utf-8")
    except OSError as exc:
        raise OutputError(f"cannot keep ngspice's output in {str(path)!r}: {exc.strerror or exc}") from exc
    return str(path)


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


def job_error(job: SimJob, kind: str, message: str, output: str, deck: str, keep_dir, tried: Sequence[str | None] = ()) -> SimulationError:
    """The SimulationError of a job ngspice could not do (``kind`` "op", "netlist", "analysis"...): the deck kept (in
    ``keep_dir`` or a temporary folder) with ngspice's whole output beside it, the message led by what ngspice itself
    named as the cause (netloop.sim.diagnostics)."""
    lines = output.splitlines()
    diagnoses = diagnose(lines, deck)
    last = tail(lines, 60)  # what travels with the error; the whole output is kept beside the deck
    path = keep_deck(deck, job.label, keep_dir)
    log_path = keep_output(path, output) if output else None
    if kind == "op":
        return op_failure(job, tried, message, path, last, diagnoses, log_path)
    lead = "; ".join(d.text for d in diagnoses if d.text not in message)
    return SimulationError(f"{lead}; {message}" if lead else message, deck_path=path, simulator_output=last, corner=job.label or None,
                           log_path=log_path, cards=tuple(d.card for d in diagnoses if d.card))
