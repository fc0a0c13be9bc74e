"""Where ngspice lives on this machine: the shared library and the batch binary."""

from __future__ import annotations

import ctypes.util
import os
import shutil
from pathlib import Path

__all__ = ["NGSPICE_THREADS", "find_libngspice", "find_ngspice_binary"]

_CANDIDATE_DIRS = (
    "/usr/lib/x86_64-linux-gnu",
    "/usr/lib/aarch64-linux-gnu",
    "/usr/lib64",
    "/usr/lib",
    "/usr/local/lib",
    "/opt/homebrew/lib",
)
_NAMES = ("libngspice.so", "libngspice.so.0", "libngspice.dylib", "libngspice.0.dylib")


def find_libngspice() -> str | None:
    """Path of the ngspice shared library, or None; ``NGSPICE_LIBRARY_PATH`` wins when it names a file."""
    env = os.environ.get("NGSPICE_LIBRARY_PATH")
    if env and Path(env).is_file():
        return env
    for directory in _CANDIDATE_DIRS:
        for name in _NAMES:
            path = Path(directory) / name
            if path.is_file():
                return str(path)
    found = ctypes.util.find_library("ngspice")
    if found is None:
        return None
    if os.path.isabs(found):
        return found if Path(found).is_file() else None
    return found  # a bare soname the dynamic loader resolves (e.g. "libngspice.so.0")


def find_ngspice_binary() -> str | None:
    """Path of the ``ngspice`` executable, or None; ``NGSPICE_BINARY`` wins when it names a file."""
    env = os.environ.get("NGSPICE_BINARY")
    if env and Path(env).is_file():
        return env
    return shutil.which("ngspice")


# Debian's libngspice evaluates devices with OpenMP on as many threads as its spinit asks for. One
# measurement is no faster with more (sky130 Miller buffer: 1.29 s on 1 thread, 1.25 s on 2), but two
# ngspice processes side by side (corners on Dask, pytest -n 2) then spin against each other: 15 s each
# instead of 1.9 s. So every ngspice that netloop starts uses one thread.
NGSPICE_THREADS = 1
