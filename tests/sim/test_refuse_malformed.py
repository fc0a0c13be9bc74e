"""A backend refuses a malformed job, before anything runs, with exactly what formatting its control steps raises."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from netloop.errors import SimulationError
from netloop.sim import AcRun, AcSweep, Alter, SimJob
from netloop.sim.backend import NgspiceBackend
from netloop.sim.deck import control_steps

_NUMBERS = st.one_of(st.floats(allow_nan=True, allow_infinity=True),
                     st.sampled_from([0.0, -1.0, 1e-3, 1.0, 1e9, 1e12, 3, math.inf, -math.inf, math.nan, "1.5", "x"]))
_NAMES = st.sampled_from(["v1", "V1", " v1 ", "i2", "I2", "", "  ", "c1 ; quit", "m.x1.m1", "r[1]", "cap", "c1"])
_SWEEPS = st.builds(AcSweep, st.sampled_from(["dec", "lin", "oct"]), st.one_of(st.integers(-2, 12), st.just(2.5)), _NUMBERS, _NUMBERS)
_RUNS = st.builds(AcRun, st.sampled_from(["series", "shunt"]), st.dictionaries(_NAMES, _NUMBERS, max_size=3),
                  st.lists(_SWEEPS, max_size=3).map(tuple))
_JOBS = st.builds(
    SimJob,
    netlist=st.just("rc\nv1 in 0 ac 1\nr1 in 0 1k\n"),
    runs=st.lists(_RUNS, max_size=3).map(tuple),
    save=st.lists(st.sampled_from(["v(in)", "I( v1 )", "v(out)", "v(a,b)", "v(x)", 3]), max_size=3).map(tuple),
    excitable=st.lists(_NAMES, max_size=3).map(tuple),
    alters=st.lists(st.builds(Alter, _NAMES, st.sampled_from(["capacitance", "w", "l", "x y", ""]), _NUMBERS), max_size=2).map(tuple),
)


def _outcome(check, job: SimJob) -> tuple[type, str] | None:
    try:
        check(job)
    except Exception as exc:  # noqa: BLE001 - the outcome compared is whatever is raised
        return type(exc), str(exc)
    return None


@settings(max_examples=400, deadline=None)
@given(_JOBS)
def test_the_check_raises_what_formatting_raises(job):
    """For any job, well-formed or not (bad sweeps, inf and nan, names carrying ngspice syntax, saves that are no
    text), the backend's check raises the same exception with the same message as control_steps formatting every
    command, or nothing when formatting succeeds (the jobs name no workdir, so the workdir check passes)."""
    assert _outcome(NgspiceBackend.refuse_malformed, job) == _outcome(lambda j: control_steps(j, write_raw=True), job)


def test_a_job_with_a_bad_value_in_a_later_run_is_refused():
    """The check looks at every run, not the first only: a non-finite AC magnitude in the second run is refused."""
    sweep = (AcSweep("dec", 5, 1.0, 1e3),)
    job = SimJob("rc\n", runs=(AcRun("a", {"v1": 1.0}, sweep), AcRun("b", {"v1": math.nan}, sweep)), save=("v(in)",))
    with pytest.raises(SimulationError, match="non-finite number nan"):
        NgspiceBackend.refuse_malformed(job)
