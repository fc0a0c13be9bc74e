"""The results file: one JSON line per finished corner, written the moment it finishes, read back for --resume.

The file is locked while a run holds it, so a second run on the same file refuses at once instead of
running every corner again beside the first. Nothing is written until the first corner finishes:
a run that measures nothing (an unreachable scheduler, an interrupt during start-up) leaves no file
behind, and ``--force`` replaces an old file only when the first new corner is ready.

Each corner record carries ``inputs``: the fingerprint (SHA-256) of every file its netlist reads
(the netlist, its includes and libraries, a variant netlist). ``--resume`` keeps a record only
while those files are unchanged; a corner whose files changed is measured again and said so, and
its new records supersede the old ones (a later run's records of a key win).
"""

from __future__ import annotations

import hashlib
import json
import os
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path

from netloop.errors import NetloopError, OutputError
from netloop.jobs.document import CORNERS_SCHEMA

__all__ = ["SCHEMA", "Journal", "default_results_path", "fingerprints", "read_records"]

SCHEMA = CORNERS_SCHEMA  # the results file and the run document share one schema name


def default_results_path(plan_path: str) -> Path:
    """plan.toml -> plan.results.jsonl, next to the plan."""
    p = Path(plan_path)
    return p.with_name(p.stem + ".results.jsonl")


def read_records(path: str | Path) -> tuple[tuple[dict, ...], int]:
    """(records, good_bytes): every complete JSON line, and the byte length up to the last complete one.

    A line cut short by a killed run (no newline at the end, or not JSON) ends the good part.
    """
    return _parse(Path(path).read_bytes())


def _parse(data: bytes) -> tuple[tuple[dict, ...], int]:
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


def fingerprints(paths: Iterable[str], cache: dict[str, str] | None = None) -> dict[str, str]:
    """{path: SHA-256 of its bytes} for each file, sorted by path; a file that cannot be read gets "missing".
    ``cache`` (path -> digest) spares hashing a file shared by many corners twice in one run."""
    cache = {} if cache is None else cache
    out = {}
    for path in sorted(set(paths)):
        if path not in cache:
            try:
                cache[path] = hashlib.sha256(Path(path).read_bytes()).hexdigest()
            except OSError:
                cache[path] = "missing"
        out[path] = cache[path]
    return out


def _changed(recorded: object, current: Mapping[str, str]) -> tuple[str, ...]:
    """The files whose fingerprint differs between a record and now ("<not recorded>" for a record without any)."""
    if not isinstance(recorded, dict):
        return ("<input fingerprints not recorded>",)
    paths = sorted(set(recorded) | set(current))
    return tuple(p for p in paths if recorded.get(p) != current.get(p))


def _lock(fd: int, path: Path) -> None:
    """An exclusive lock on the open results file, or NetloopError at once when another run holds it."""
    try:
        import fcntl
    except ImportError:  # pragma: no cover - no advisory locks on this system
        return
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except BlockingIOError as exc:
        raise NetloopError(f"the results file {path} is in use by another netloop corners run; wait for it to end, "
                           "or give this run another file with --out") from exc


@dataclass
class Journal:
    """An open, locked results file. ``done`` maps task keys to the records already in the file (``resume``) whose
    input files are unchanged; ``rerun`` maps the keys whose files changed to those files."""

    path: Path
    done: dict[str, list[dict]]
    _fh: object = None
    _header: dict = field(default_factory=dict)
    _fresh: bool = False  # the file is to be (re)written from the start on the first write
    _created: bool = False  # this run created the file
    _written: bool = False
    rerun: dict[str, tuple[str, ...]] = field(default_factory=dict)

    @classmethod
    def open(cls, path: str | Path, *, plan: str, total: int, resume: bool, force: bool,
             inputs: Mapping[str, Mapping[str, str]] | None = None) -> Journal:
        """Open and lock the results file. An existing file is kept and continued with ``resume``, replaced with
        ``force`` (when the first corner is written), and otherwise left alone: NetloopError saying which option to
        pass. ``inputs`` maps each task key to the fingerprints of its input files now (see ``fingerprints``); with
        ``resume`` a record whose files changed is not taken as done."""
        p = Path(path)
        if resume and force:
            raise NetloopError("--resume and --force contradict each other: --resume continues the results file, --force replaces it")
        if p.is_dir():
            raise OutputError(f"the results file {p} is a folder; give --out a file name")
        existed = p.exists()
        if existed and not (resume or force):
            raise NetloopError(f"the results file {p} already exists and would be overwritten; "
                               "pass --resume to skip the corners it holds and run the rest, "
                               "or --force to replace it (or --out another file)")
        try:
            p.parent.mkdir(parents=True, exist_ok=True)
            fh = open(p, "a+b")  # noqa: SIM115 - held open (and locked) for the whole run
        except OSError as exc:
            raise OutputError(f"cannot write the results file {str(p)!r}: {exc.strerror or exc}") from exc
        try:
            _lock(fh.fileno(), p)
        except NetloopError:
            fh.close()
            raise
        journal = cls(p, {}, fh, _created=not existed)
        started = datetime.now(timezone.utc).isoformat(timespec="seconds")  # for trends over several results files
        journal._header = {"record": "run", "schema": SCHEMA, "plan": plan, "corners": total, "resumed": False, "started": started}
        if existed and resume:
            journal._resume(inputs or {})
        else:
            journal._fresh = True
        return journal

    def _resume(self, inputs: Mapping[str, Mapping[str, str]]) -> None:
        """Read the records of an existing file (the last run's records of each key win), drop a line cut short by a
        killed run, and sort the keys into done and rerun by their input files."""
        fh = self._fh
        fh.seek(0)
        records, good = _parse(fh.read())
        fh.truncate(good)
        latest: dict[str, tuple[int, list[dict]]] = {}
        run = 0
        for r in records:
            if r.get("record") == "run":
                run += 1
            elif r.get("record") == "corner" and isinstance(r.get("key"), str):
                seen = latest.get(r["key"])
                if seen is None or seen[0] < run:
                    latest[r["key"]] = (run, [r])
                else:
                    seen[1].append(r)
        for key, (_, recs) in latest.items():
            changed = _changed(recs[0].get("inputs"), inputs[key]) if key in inputs else ()
            if changed:
                self.rerun[key] = changed
            else:
                self.done[key] = recs
        self._header["resumed"] = bool(self.done)

    def _write_text(self, text: str) -> None:
        if not self._written:
            if self._fresh:
                self._fh.truncate(0)
            text = json.dumps(self._header, allow_nan=False, separators=(",", ":")) + "\n" + text
            self._written = True
        self._fh.write(text.encode("utf-8"))  # one write: a task's records land together or not at all
        self._fh.flush()
        os.fsync(self._fh.fileno())

    def write(self, records: tuple[dict, ...]) -> None:
        """Append a finished task's records (after the run's header, on the first call), flushed to disk before returning."""
        self._write_text("".join(json.dumps(r, allow_nan=False, separators=(",", ":")) + "\n" for r in records))

    def close(self) -> None:
        """Release the file; a file this run created and never wrote to is removed."""
        if self._fh is None:
            return
        if self._created and not self._written:
            self.path.unlink(missing_ok=True)
        self._fh.close()
        self._fh = None
