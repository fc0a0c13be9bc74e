"""The results file: one JSON line per finished corner, written the moment it finishes, read back for --resume."""

from __future__ import annotations

import json
import os
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path

from netloop.errors import NetloopError, OutputError
from netloop.jobs.document import CORNERS_SCHEMA

__all__ = ["SCHEMA", "Journal", "default_results_path", "read_records"]

SCHEMA = CORNERS_SCHEMA  # the results file and the run document share one schema name


def default_results_path(plan_path: str) -> Path:
    """plan.toml -> plan.results.jsonl, next to the plan."""
    p = Path(plan_path)
    return p.with_name(p.stem + ".results.jsonl")


def read_records(path: str | Path) -> tuple[tuple[dict, ...], int]:
    """(records, good_bytes): every complete JSON line, and the byte length up to the last complete one.

    A line cut short by a killed run (no newline at the end, or not JSON) ends the good part.
    """
    data = Path(path).read_bytes()
    records: list[dict] = []
    good = 0
    for raw in data.splitlines(keepends=True):
        if not raw.endswith(b"\n"):
            break
        try:
            item = json.loads(raw)
        except ValueError:
            break
        if isinstance(item, dict):
            records.append(item)
        good += len(raw)
    return tuple(records), good


@dataclass
class Journal:
    """An open results file. ``done`` maps task keys to the records already in the file."""

    path: Path
    done: dict[str, list[dict]]
    _fh: object = None

    @classmethod
    def open(cls, path: str | Path, *, plan: str, total: int, resume: bool, force: bool) -> Journal:
        """Open for writing. An existing file is kept and continued with ``resume``, replaced with ``force``,
        and otherwise left alone: NetloopError saying which option to pass."""
        p = Path(path)
        if resume and force:
            raise NetloopError("--resume and --force contradict each other: --resume continues the results file, --force replaces it")
        done: dict[str, list[dict]] = {}
        if p.is_dir():
            raise OutputError(f"the results file {p} is a folder; give --out a file name")
        try:
            fh = cls._open_file(p, done, resume=resume, force=force)
        except OSError as exc:
            raise OutputError(f"cannot write the results file {str(p)!r}: {exc.strerror or exc}") from exc
        journal = cls(p, done, fh)
        started = datetime.now(timezone.utc).isoformat(timespec="seconds")  # for trends over several results files
        journal._write({"record": "run", "schema": SCHEMA, "plan": plan, "corners": total, "resumed": bool(done), "started": started})
        return journal

    @staticmethod
    def _open_file(p: Path, done: dict[str, list[dict]], *, resume: bool, force: bool):
        """The results file opened for appending (resume) or writing; fills ``done`` from a resumed file."""
        if p.exists() and not (resume or force):
            raise NetloopError(f"the results file {p} already exists and would be overwritten; "
                               "pass --resume to skip the corners it holds and run the rest, "
                               "or --force to replace it (or --out another file)")
        if p.exists() and resume:
            records, good = read_records(p)
            for r in records:
                if r.get("record") == "corner" and isinstance(r.get("key"), str):
                    done.setdefault(r["key"], []).append(r)
            with open(p, "r+b") as fh:  # drop a line cut short by a killed run
                fh.truncate(good)
            fh = open(p, "a", encoding="utf-8")
        else:
            p.parent.mkdir(parents=True, exist_ok=True)
            fh = open(p, "w", encoding="utf-8")
        return fh

    def _write(self, item: dict) -> None:
        self._fh.write(json.dumps(item, allow_nan=False, separators=(",", ":")) + "\n")
        self._fh.flush()
        os.fsync(self._fh.fileno())

    def write(self, records: tuple[dict, ...]) -> None:
        """Append a finished task's records, flushed to disk before returning."""
        text = "".join(json.dumps(r, allow_nan=False, separators=(",", ":")) + "\n" for r in records)
        self._fh.write(text)  # one write: a task's records land together or not at all
        self._fh.flush()
        os.fsync(self._fh.fileno())

    def close(self) -> None:
        if self._fh is not None:
            self._fh.close()
            self._fh = None
