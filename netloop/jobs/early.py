"""What a job needs started before its own modules load: the ngspice worker process (netloop.sim.spawn)."""

from __future__ import annotations

import contextlib
from collections.abc import Iterator

__all__ = ["ngspice_started_early"]


@contextlib.contextmanager
def ngspice_started_early(netlist: str | None = None) -> Iterator[None]:
    """Start an ngspice worker process now, for the job's simulator to take when it starts; a process no simulator
    took is stopped on the way out. Imports nothing heavy: use it first thing (``netloop check`` does). ``netlist``:
    the file the job reads; the worker reads its model libraries meanwhile."""
    from netloop.sim.spawn import discard, start_ahead

    start_ahead(netlist)
    try:
        yield
    finally:
        discard()
