"""Fixtures of the report tests: analysed analytic loops wrapped in LoopResults."""

from __future__ import annotations

import pytest

import numpy as np
from report_loops import conditional, make_result, marginal, quiet, two_stage, unstable


@pytest.fixture(scope="session")
def stable_result():
    return make_result(two_stage, requirements=("pm>=60", "gm>=10"), ignored=("circuits/front_end.cir:12: .tran 1n 1u",))


@pytest.fixture(scope="session")
def conditional_result():
    return make_result(conditional, node="xldo.fb", label="ss_125c")


@pytest.fixture(scope="session")
def unstable_result():
    return make_result(unstable, requirements=("pm>=45",), label="ff_m40c")


@pytest.fixture(scope="session")
def quiet_result():
    return make_result(quiet, requirements=("pm>=45", "gm>=6"))


@pytest.fixture(scope="session")
def quiet_free_result():
    """The loop that never reaches 0 dB, checked without requirements."""
    return make_result(quiet)


@pytest.fixture(scope="session")
def marginal_result():
    """A stable loop below common practice, checked without requirements."""
    return make_result(marginal, label="sf_m40c")


@pytest.fixture(scope="session")
def inconclusive_result():
    """The two-stage loop swept only up to 1 MHz, below its 9.5 MHz crossover: the Nyquist count is doubtful."""
    return make_result(two_stage, requirements=("pm>=45",), label="fs_27c", freq_hz=np.logspace(0, 6, 61))
