"""Fixtures of the report tests: analysed analytic loops wrapped in LoopResults."""

from __future__ import annotations

import pytest

from report_loops import conditional, make_result, quiet, two_stage, unstable


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
