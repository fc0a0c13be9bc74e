"""A pytest plugin tools/mutate.py loads into mutmut's test runs: it stops a mutant's test that runs far longer than the same test did on the clean code.

A mutant that loses a corner's result leaves a test waiting for ever on a Dask future; the same wait would hang a user's
run, so the tests have noticed the mutant and it counts as caught. mutmut's own limit covers the whole set of tests that
reach the mutated function (ten times their clean time together), so a hang in one test used to cost many minutes; this
limit is per test: HANG_FACTOR times the test's clean time (mutmut measures it before it tests any mutant, in the
mutants/mutmut-stats.json that MUTATE_TEST_DURATIONS names) plus HANG_MARGIN_S for a busy machine. A test past its limit
ends the mutant's run with mutmut's own exit code for a timeout, after its child processes (a Dask cluster's workers,
ngspice) are stopped. Only a mutant's run is watched: mutmut's stats, clean and forced-fail runs are not.
"""

from __future__ import annotations

import json
import os
import signal
import sys
import threading
import time
from pathlib import Path

import pytest

HANG_FACTOR = 3.0
HANG_MARGIN_S = 30.0
MUTMUT_TIMEOUT_EXIT = 36  # mutmut reads this exit code as "timeout" (mutmut/stats.py)

_current: list[tuple[str, float]] = []  # the running test's node id and the time past which it counts as hung


def _limits() -> dict[str, float]:
    """Each test's hang limit in seconds, from the clean durations mutmut recorded."""
    durations = json.loads(Path(os.environ["MUTATE_TEST_DURATIONS"]).read_text())["duration_by_test"]
    return {test: HANG_FACTOR * seconds + HANG_MARGIN_S for test, seconds in durations.items()}


def _stop_descendants(pid: int) -> None:
    """SIGKILL every process below ``pid`` (children first found, then theirs)."""
    for task in Path(f"/proc/{pid}/task").iterdir():
        for child in (task / "children").read_text().split():
            try:
                _stop_descendants(int(child))
                os.kill(int(child), signal.SIGKILL)
            except OSError:
                pass


def _watch() -> None:
    """Once a second: end the run if the running test is past its limit."""
    while True:
        time.sleep(1.0)
        if _current and time.monotonic() > _current[-1][1]:
            print(f"mutate_watchdog: {_current[-1][0]} hung (past {HANG_FACTOR:g} x its clean time + {HANG_MARGIN_S:g} s)", file=sys.__stderr__)
            _stop_descendants(os.getpid())
            os._exit(MUTMUT_TIMEOUT_EXIT)


def _watching() -> bool:
    """A mutant's run (mutmut names the mutant; its other runs are "", "stats", "fail", "list_all_tests")."""
    return "__mutmut_" in os.environ.get("MUTANT_UNDER_TEST", "") and "MUTATE_TEST_DURATIONS" in os.environ


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_protocol(item: pytest.Item, nextitem: pytest.Item | None):
    """Time each test of a mutant's run (setup, call and teardown) against its limit."""
    if not _watching():
        yield
        return
    if not _current:
        threading.Thread(target=_watch, name="mutate-watchdog", daemon=True).start()
        _current.append(("", float("inf")))
    limit = _limits().get(item.nodeid)  # a test mutmut has not timed (none should be) is left to mutmut's own limit
    _current[-1] = (item.nodeid, time.monotonic() + limit if limit is not None else float("inf"))
    yield
    _current[-1] = (item.nodeid, float("inf"))
