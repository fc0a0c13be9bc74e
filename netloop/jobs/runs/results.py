"""Read a results file of `netloop corners` (one JSON line per corner) as the records of one run."""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

from netloop.errors import ResultsError
from netloop.jobs.document import CORNERS_SCHEMA

__all__ = ["REQUIRED_KEYS", "ResultsFile", "read_results"]

REQUIRED_KEYS = ("corner", "at", "outcome", "settings", "loop")
"""Keys every corner record of a results file has (netloop.jobs.corners.worker)."""


@dataclass(frozen=True, slots=True)
class ResultsFile:
    """The corner records of one results file: the last record of each corner and break node, in file order."""

    path: str
    plan: str  # the plan the file's first run header names ("" when it names none)
    started: str  # when its first run started, ISO 8601 UTC ("" for files written before netloop recorded it)
    records: tuple[dict, ...]
    replaced: int = 0  # earlier records of a corner and break node that a later line of the file replaced

    @property
    def name(self) -> str:
        """The file's name, for column heads and legends."""
        return Path(self.path).name


_NOT_RESULTS = (f"not a results file of `netloop corners` (its first line is not the {CORNERS_SCHEMA} run record); "
                "give the PLAN.results.jsonl file a corner run wrote")


def _fail(path: str, line: int | None, message: str) -> ResultsError:
    return ResultsError(f"{path}{f':{line}' if line else ''}: {message}")


def read_results(path: str | Path) -> ResultsFile:
    """The records of a results file (``PLAN.results.jsonl``); ResultsError with file:line when it is not one.

    A last line cut short (a run killed while writing) is left out, as ``--resume`` does; a bad line with
    complete lines after it is an error. When a corner and break node appear more than once (a file
    continued with --resume after the plan changed), the last record counts.
    """
    p = str(path)
    try:
        data = Path(path).read_bytes()
    except OSError as exc:
        raise ResultsError(f"cannot read the results file {p!r}: {exc.strerror or exc}") from exc
    lines = data.splitlines(keepends=True)
    header: dict | None = None
    by_key: dict[tuple[str, str], dict] = {}
    replaced = 0
    for number, raw in enumerate(lines, start=1):
        last = number == len(lines)
        try:
            item = json.loads(raw)
        except ValueError:
            if header is None:
                raise _fail(p, number, _NOT_RESULTS) from None
            if last:
                break  # cut short by a killed run
            raise _fail(p, number, "not a JSON line; a results file has one JSON object a line, as `netloop corners` writes it") from None
        if not isinstance(item, dict):
            raise _fail(p, number, "not a JSON object; a results file has one JSON object a line")
        if header is None:
            if item.get("record") != "run" or item.get("schema") != CORNERS_SCHEMA:
                raise _fail(p, number, _NOT_RESULTS)
            header = item
            continue
        if item.get("record") != "corner":
            continue  # a later run's header (a resumed file)
        missing = [k for k in REQUIRED_KEYS if k not in item]
        if missing:
            raise _fail(p, number, f"a corner record without {', '.join(missing)}")
        key = (str(item["corner"]), str(item["at"] or ""))
        if key in by_key:
            replaced += 1
            del by_key[key]  # the later record counts, at its own place in the order
        by_key[key] = item
    if header is None:
        raise _fail(p, None, "empty; a results file starts with the run record `netloop corners` writes")
    return ResultsFile(p, str(header.get("plan") or ""), str(header.get("started") or ""), tuple(by_key.values()), replaced)
