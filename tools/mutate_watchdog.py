"""A pytest plugin tools/mutate.py loads into mutmut's test runs: it stops a mutant's test that runs far longer than the same test did on the clean code.

A mutant that loses a corner's result leaves a test waiting for ever on a Dask future; the same wait would hang a user's
run, so the tests have noticed the mutant and it counts as caught. mutmut's own limit covers the whole set of tests that
reach the mutated function (ten times their clean time together), so a hang in one test used to cost many minutes; this
limit is per test: HANG_FACTOR times the test's clean time (mutmut measures it before it tests any mutant, in the
mutants/mutmut-stats.json that MUTATE_TEST_DURATIONS names) plus HANG_MARGIN_S, with room for a busy machine (under a
load of 5 to 7 on two CPUs the corners tests ran 4.4 times slower than mutmut had timed them). A test past its limit is
written to the file MUTATE_HUNG_LOG names and ends the mutant's run with mutmut's exit code for a timeout, after its
child processes (a Dask cluster's workers, ngspice) are stopped.

Two more things put a mutant's run back the way mutmut's own runner (one fork of the process that ran the clean tests)
has it: the fork server mutmut forks each mutant from leaves its own SIGCHLD handler in place, so the default comes back;
and the tests run fastest first (mutmut sorts them so in that runner only), so a mutant a unit test catches is not first
run through the Dask tests. Only a mutant's run is touched: mutmut's stats, clean and forced-fail runs are not.

In the stats run, the functions that an ngspice worker process reached during a test (tools/sitecustomize.py writes their
names to files in the folder MUTATE_CHILD_HITS names) are handed to mutmut as reached by that test.
"""

from __future__ import annotations

import json
import os
import signal
import threading
import time
from pathlib import Path

import pytest

HANG_FACTOR = 5.0
HANG_MARGIN_S = 60.0
MUTMUT_TIMEOUT_EXIT = 36  # mutmut reads this exit code as "timeout" (mutmut/stats.py)

_current: list[tuple[str, float]] = []  # the running test's node id and the time past which it counts as hung


def _watching() -> bool:
    """A mutant's run (mutmut names the mutant; its other runs are "", "stats", "fail", "list_all_tests")."""
    return "__mutmut_" in os.environ.get("MUTANT_UNDER_TEST", "") and "MUTATE_TEST_DURATIONS" in os.environ


def _durations() -> dict[str, float]:
    """Each test's clean duration in seconds, as mutmut recorded it."""
    return json.loads(Path(os.environ["MUTATE_TEST_DURATIONS"]).read_text())["duration_by_test"]


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
            with open(os.environ.get("MUTATE_HUNG_LOG", os.devnull), "a") as log:
                log.write(f"{os.environ['MUTANT_UNDER_TEST']}: {_current[-1][0]} past {HANG_FACTOR:g} x its clean time + {HANG_MARGIN_S:g} s\n")
            _stop_descendants(os.getpid())
            os._exit(MUTMUT_TIMEOUT_EXIT)


@pytest.hookimpl(tryfirst=True)
def pytest_runtest_teardown(item: pytest.Item, nextitem: pytest.Item | None) -> None:
    """In mutmut's stats run: the functions worker processes reached meanwhile, added to what mutmut's own teardown hook
    (which runs after this one) gives the test."""
    folder = os.environ.get("MUTATE_CHILD_HITS")
    if os.environ.get("MUTANT_UNDER_TEST") != "stats" or not folder or not os.path.isdir(folder):
        return
    from mutmut.state import state  # noqa: PLC0415 - only in a mutmut run

    for path in Path(folder).glob("*.hits"):
        names = path.read_text().split()
        path.write_text("")  # a worker kept for the next test appends after what this one took
        state()._stats.update(names)


def pytest_collection_modifyitems(items: list[pytest.Item]) -> None:
    """In a mutant's run: the fastest tests first, and the default SIGCHLD action back."""
    if _watching():
        signal.signal(signal.SIGCHLD, signal.SIG_DFL)
        durations = _durations()
        items.sort(key=lambda item: durations.get(item.nodeid, 0.0))


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_protocol(item: pytest.Item, nextitem: pytest.Item | None):
    """Time each test of a mutant's run (setup, call and teardown) against its limit."""
    if not _watching():
        yield
        return
    if not _current:
        threading.Thread(target=_watch, name="mutate-watchdog", daemon=True).start()
        _current.append(("", float("inf")))
    clean = _durations().get(item.nodeid)  # a test mutmut has not timed (none should be) is left to mutmut's own limit
    _current[-1] = (item.nodeid, time.monotonic() + HANG_FACTOR * clean + HANG_MARGIN_S if clean is not None else float("inf"))
    yield
    _current[-1] = (item.nodeid, float("inf"))
