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
