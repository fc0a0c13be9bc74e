"""Loaded at start-up by every Python process of a mutmut run (tools/ is on PYTHONPATH there, tools/mutate.py's _mutmut),
so also by the ngspice worker processes the tests start (netloop.sim.spawn passes PYTHONPATH on).

mutmut learns which test reaches which function from its "stats" run: each mutated function, when called, records its
name in the process's memory, and mutmut's pytest hook gives the names to the test that ran. A worker process runs
netloop.sim's session code out of reach of that memory, and in the folder of a job, where mutmut finds no settings. In
such a process started during the stats run, each name is appended instead to a file of its own in the folder
MUTATE_CHILD_HITS names; tools/mutate_watchdog.py hands the names to mutmut at the end of each test. The mutants
themselves need nothing: a worker process inherits MUTANT_UNDER_TEST and runs the mutant it names.
"""

from __future__ import annotations

import os


def _record_to_file(folder: str) -> None:
    from mutmut.mutation import trampoline  # noqa: PLC0415 - only in a mutmut run

    fd = os.open(os.path.join(folder, f"{os.getpid()}.hits"), os.O_WRONLY | os.O_CREAT | os.O_APPEND, 0o644)

    def record(name: str, caller: str | None = None) -> None:
        os.write(fd, f"{name}\n".encode())

    trampoline.record_trampoline_hit = record


if os.environ.get("MUTANT_UNDER_TEST") == "stats" and os.environ.get("MUTATE_CHILD_HITS"):
    _record_to_file(os.environ["MUTATE_CHILD_HITS"])
