"""The ngspice worker process, and one started ahead of need: ``netloop check`` starts it before loading its own modules.

A worker process takes a few tenths of a second to start (Python, PySpice, libngspice reading its
init scripts). Started first thing, it is ready by the time the netlist is read and broken, so the
circuit load (seconds with a real process's model files) begins as early as it can. This module
imports nothing heavy, so that starting the process is the first thing that happens. A process
started ahead and not taken by any simulator is stopped by ``discard`` (or when Python exits).
"""

from __future__ import annotations

import atexit
import os
import subprocess
import sys
import tempfile
import threading
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path

from netloop.sim.library import find_libngspice

__all__ = ["Spawned", "discard", "spawn", "start_ahead", "take", "this_netloop"]

WARM_ENV = "NETLOOP_WORKER_WARM"  # the netlist whose libraries a worker started ahead reads while it waits
_PACKAGE_ROOT = str(Path(__file__).resolve().parent.parent.parent)


@dataclass(slots=True)
class Spawned:
    """A worker process as started: its pipes, its scratch folder and the log its stderr goes to."""

    process: subprocess.Popen
    scratch: tempfile.TemporaryDirectory
    log_path: Path
    key: tuple  # what it was started for: library path, folder, environment

    def stop(self) -> None:
        if self.process.poll() is None:
            self.process.kill()
        self.process.wait()
        for pipe in (self.process.stdin, self.process.stdout):
            try:
                pipe.close()
            except OSError:
                pass
        self.scratch.cleanup()


def _key(library_path: str) -> tuple:
    return (library_path, os.getcwd(), os.environ.get("PYTHONPATH", ""), sys.executable)


def this_netloop(env: Mapping[str, str]) -> dict[str, str]:
    """``env`` with the folder this netloop is imported from first on PYTHONPATH: a Python process started with it imports
    this very netloop, whatever folder it starts in."""
    return {**env, "PYTHONPATH": os.pathsep.join(p for p in (_PACKAGE_ROOT, env.get("PYTHONPATH", "")) if p)}


def spawn(library_path: str, warm: str | None = None) -> Spawned:
    """Start a worker process for ``library_path`` (``python -m netloop.sim.worker``); it says "ready" when it is.
    ``warm``: a netlist whose model libraries it reads then, while its caller works (netloop.sim.used_models.warm)."""
    scratch = tempfile.TemporaryDirectory(prefix="netloop-worker-")
    log_path = Path(scratch.name) / "worker.log"
    env = this_netloop(os.environ)
    env["PYTHONWARNINGS"] = "ignore"
    env.pop(WARM_ENV, None)
    if warm:
        env[WARM_ENV] = os.path.abspath(warm)
    with open(log_path, "wb") as log:
        process = subprocess.Popen(
            [sys.executable, "-m", "netloop.sim.worker", library_path],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=log,
            # ngspice reads .spiceinit from the folder it starts in: the caller's, as batch mode and ngspice itself do
            cwd=os.getcwd(),
            env=env,
        )
    return Spawned(process, scratch, log_path, _key(library_path))


_AHEAD: list[Spawned] = []
_LOCK = threading.Lock()


def start_ahead(warm: str | None = None) -> None:
    """Start one worker process now, for the first simulator that starts in this folder to take; nothing when
    libngspice is not found (the simulator then says why) or one is already waiting. ``warm``: the netlist the job
    will read, whose model libraries the worker reads while the caller reads the netlist itself."""
    library_path = find_libngspice()
    if library_path is None:
        return
    with _LOCK:
        if not _AHEAD:
            _AHEAD.append(spawn(library_path, warm))


def take(library_path: str) -> Spawned | None:
    """The worker process started ahead for ``library_path`` here, still running, or None."""
    with _LOCK:
        for i, spawned in enumerate(_AHEAD):
            if spawned.key == _key(library_path) and spawned.process.poll() is None:
                return _AHEAD.pop(i)
    return None


def discard() -> None:
    """Stop any worker process started ahead that no simulator took."""
    with _LOCK:
        waiting = list(_AHEAD)
        _AHEAD.clear()
    for spawned in waiting:
        spawned.stop()


atexit.register(discard)
