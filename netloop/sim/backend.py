"""What the two ngspice backends share: use as a context manager, and refuse a malformed job before any work."""

from __future__ import annotations

from typing import TypeVar

from netloop.sim.deck import check_workdir, control_steps
from netloop.sim.job import SimJob

__all__ = ["NgspiceBackend"]

_B = TypeVar("_B", bound="NgspiceBackend")


class NgspiceBackend:
    """Base of BatchSimulator and SharedLibrarySimulator: ``with`` closes the backend on exit."""

    def close(self) -> None:
        """Release what the backend holds (nothing by default)."""

    def __enter__(self: _B) -> _B:
        return self

    def __exit__(self, *exc_info: object) -> None:
        self.close()

    @staticmethod
    def refuse_malformed(job: SimJob) -> None:
        """SimulationError for a bad sweep, a non-finite value or a missing workdir, before anything runs: the deck's
        control steps are where each is formatted and refused (netloop.sim.deck), the rest of the deck only substitutes."""
        control_steps(job, write_raw=True)
        check_workdir(job)
