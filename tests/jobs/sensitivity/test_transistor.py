"""Sensitivities of transistor op-amps (invented level-1 models): what ranks first, the solved value measured afresh,
knobs inside subcircuit instances, a withheld ranking, and the same slopes from Dask workers."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from netloop.errors import NetloopError
from netloop.jobs.measure import Sweep, load_netlist
from netloop.jobs.sensitivity import find_knobs, select_knobs, sensitivities
from netloop.sim import SharedLibrarySimulator


@pytest.fixture(scope="module")
def simulator():
    with SharedLibrarySimulator() as sim:
        yield sim


@pytest.fixture(scope="module")
def ref_buffer(circuits_dir, simulator):
    """Every knob of circuits/ref_buffer.cir ranked, and the top two solved for pm>=65 (measured: about 63.5 deg)."""
    return sensitivities(circuits_dir / "ref_buffer.cir", "out", requirements=["pm>=65"], top=2, simulator=simulator)


@pytest.fixture(scope="module")
def circuits_dir() -> Path:
    return Path(__file__).resolve().parents[3] / "circuits"


@pytest.mark.ngspice
def test_compensation_and_load_capacitors_rank_first(ref_buffer):
    """In the two-stage op-amp of unit devices the Miller capacitor and the load capacitor move the phase margin most
    (common practice: PM ~ 90 deg - atan(GBW/p2) with GBW/p2 ~ (gm1/gm6)(CL/Cc), where a size moves a gm by its square root)."""
    assert len(ref_buffer.sensitivities) == 30
    top = [s.knob.name for s in ref_buffer.sensitivities[:2]]
    assert sorted(top) == ["cc", "cl"]
    by = {s.knob.name: s for s in ref_buffer.sensitivities}
    cc, cl = by["cc"], by["cl"]
    assert cc.pm.per_decade > 0 > cl.pm.per_decade  # more Cc, more margin; more CL, less
    third = ref_buffer.sensitivities[2]
    assert abs(third.pm.per_decade) < 0.75 * min(abs(cc.pm.per_decade), abs(cl.pm.per_decade))


@pytest.mark.ngspice
def test_solved_compensation_meets_the_requirement_afresh(ref_buffer):
    """The Cc solved for pm>=65, written into the netlist and measured afresh, meets pm>=65 to 0.01 deg."""
    w = next(w for w in ref_buffer.what_ifs if w.knob.name == "cc")
    assert not w.met_at_value and w.monotonic and w.factor > 1
    pm = w.check.analysis.margins.phase_margin_deg
    assert w.confirmed and 65.0 <= pm < 65.01
    assert re.fullmatch(r"Cc cz out \{\(cc\)\*[0-9.]+\}", w.edited)
    assert w.check.breaks.node == "out" and w.check.verdict == "pass"


@pytest.mark.ngspice
def test_solved_load_goes_down(ref_buffer):
    """The load capacitance that meets pm>=65 is smaller than the measured one, and meets it afresh."""
    w = next(w for w in ref_buffer.what_ifs if w.knob.name == "cl")
    assert w.factor < 1 and w.confirmed


@pytest.mark.ngspice
def test_knobs_of_one_instance_leave_the_other(circuits_dir, simulator):
    """In the two-channel readout, channel 1's Miller capacitor moves channel 1's margin and channel 2's does not:
    each instance's element is its own knob (ngspice's c.xa1.cc and c.xa2.cc)."""
    run = sensitivities(circuits_dir / "hier" / "top.cir", "out1", knobs=["xa1.cc", "xa2.cc"], simulator=simulator)
    by = {s.knob.name: s for s in run.sensitivities}
    assert by["xa1.cc"].knob.device == "c.xa1.cc"
    assert by["xa1.cc"].pm.per_decade > 30
    assert abs(by["xa2.cc"].pm.per_decade) < 0.1


@pytest.mark.ngspice
def test_solved_value_inside_an_instance_changes_that_instance_only(circuits_dir, simulator):
    """A what-if on xa1.cc measures afresh a netlist where only instance xa1 uses a changed copy of miller_ota."""
    run = sensitivities(circuits_dir / "hier" / "top.cir", "out1", knobs=["xa1.cc"], requirements=["pm>=70"], simulator=simulator)
    w = run.what_ifs[0]
    assert w.confirmed and w.check.analysis.margins.phase_margin_deg == pytest.approx(70.0, abs=0.01)
    assert w.factor > 1


@pytest.mark.ngspice
def test_inconclusive_measurement_gives_no_sensitivity(circuits_dir, simulator):
    """A sweep that ends before |T| falls below 1 fails a self-check: the run is inconclusive and ranks nothing."""
    run = sensitivities(circuits_dir / "miller_buffer.cir", "out", sweep=Sweep(fmax_hz=1e6, fmax_given=True), simulator=simulator)
    assert run.verdict == "inconclusive"
    assert run.sensitivities == () and run.what_ifs == ()
    assert "self-checks failed" in run.withheld
    details = [c.detail for c in run.nominal.failed_checks]  # the run's own failed checks, each named in the reason
    assert details and all(d and d in run.withheld for d in details)


@pytest.mark.ngspice
def test_dask_workers_give_the_same_slopes(circuits_dir, simulator):
    """Knobs shared out to two Dask workers (each its own ngspice) give the slopes one ngspice gives, in the same order."""
    knobs = ["cc", "cl", "m6:w", "m1:l", "rz"]
    here = sensitivities(circuits_dir / "ref_buffer.cir", "out", knobs=knobs, workers=1, simulator=simulator)
    spread = sensitivities(circuits_dir / "ref_buffer.cir", "out", knobs=knobs, workers=2, simulator=simulator)
    assert spread.workers == 2
    for a, b in zip(here.sensitivities, spread.sensitivities, strict=True):
        assert a.knob == b.knob
        for f in ("pm", "gm", "fc", "peak"):
            assert b.slope(f).per_decade == pytest.approx(a.slope(f).per_decade, rel=1e-9, abs=1e-12)


def test_unknown_knob_names_close_ones(circuits_dir):
    """A knob name the netlist lacks is refused with the close names (no simulation)."""
    knobs = find_knobs(load_netlist(circuits_dir / "ref_buffer.cir"))
    with pytest.raises(NetloopError, match="did you mean m6:w"):
        select_knobs(knobs, ["m6:ww"])
    assert [k.name for k in select_knobs(knobs, ["m6"])] == ["m6:w", "m6:l", "m6:m"]


def test_bad_step_and_range_are_refused(circuits_dir):
    """A step outside (0, 0.2] or a range that does not hold 1 is refused before anything runs."""
    with pytest.raises(NetloopError, match="step"):
        sensitivities(circuits_dir / "ref_buffer.cir", "out", step=0.5)
    with pytest.raises(NetloopError, match="LOW,HIGH"):
        sensitivities(circuits_dir / "ref_buffer.cir", "out", span=(2.0, 10.0))


@pytest.mark.ngspice
def test_changed_values_simulate_only_near_the_crossovers(circuits_dir, simulator):
    """Each changed value of a knob is one job on the measured circuit (same circuit_id: no new load) whose sweeps are the
    short windows around the measured crossovers plus two single frequencies, each with the knob's alter and nothing else."""
    from netloop.jobs.sensitivity.job import _Remembering  # noqa: PLC0415 - records the jobs sent

    recorder = _Remembering(simulator)
    run = sensitivities(circuits_dir / "ref_buffer.cir", "out", knobs=["cc"], simulator=recorder)
    changed = [j for j in recorder.jobs if j.alters]
    assert len(changed) == 4 and run.sensitivities[0].whole_sweeps == 0
    measured = next(j for j in recorder.jobs if not j.alters)
    fc = run.nominal.analysis.margins.unity_gain_hz
    for job in changed:
        assert job.circuit_id == measured.circuit_id and job.netlist == measured.netlist
        (alter,) = job.alters
        assert (alter.device, alter.parameter) == ("cc", "capacitance")
        sweeps = job.runs[0].sweeps
        assert all(s.kind == "lin" for s in sweeps) and sum(s.points for s in sweeps) <= 40
        assert any(s.fstart_hz < fc < s.fstop_hz and s.fstop_hz / s.fstart_hz < 1.2 for s in sweeps)


@pytest.mark.ngspice
def test_a_chained_measurement_changes_its_values_on_the_measured_circuit(circuits_dir, simulator):
    """At node gate of circuits/sky130/ldo.cir the measured netlist also holds the other split's probe at rest
    (netloop.probe.chain): each changed value of a knob still runs on the measured circuit (its circuit_id and netlist:
    no new load), exciting the split that was measured (its series source in the first run)."""
    from netloop.jobs.sensitivity.job import _Remembering  # noqa: PLC0415 - records the jobs sent

    recorder = _Remembering(simulator)
    run = sensitivities(circuits_dir / "sky130" / "ldo.cir", "gate", knobs=["cout"], simulator=recorder)
    measured = next(j for j in recorder.jobs if not j.alters)
    changed = [j for j in recorder.jobs if j.alters]
    assert len(measured.excitable) == 4 and len(changed) == 4 and run.sensitivities[0].whole_sweeps == 0
    for job in changed:
        assert job.circuit_id == measured.circuit_id and job.netlist == measured.netlist
        assert job.runs[0].ac == measured.runs[0].ac == {"vnl_series": 1.0, "inl_shunt": 0.0}
