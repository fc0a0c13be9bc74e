"""Fixtures for the sim tests: one shared-library simulator per session, a batch one, and both."""

from __future__ import annotations

import pytest

from netloop.sim import BatchSimulator, SharedLibrarySimulator


@pytest.fixture(scope="session")
def shared_sim():
    with SharedLibrarySimulator() as simulator:
        yield simulator


@pytest.fixture(scope="session")
def batch_sim():
    return BatchSimulator()


@pytest.fixture(params=["shared", "batch"])
def simulator(request, shared_sim, batch_sim):
    """Each backend in turn."""
    return shared_sim if request.param == "shared" else batch_sim
