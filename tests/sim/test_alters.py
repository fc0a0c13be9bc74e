"""A job's Alters change device parameters of the loaded circuit for that job only, as a changed netlist would."""

from __future__ import annotations

import numpy as np
import pytest

from netloop.errors import SimulationError
from netloop.sim import AcRun, AcSweep, Alter, SimJob
from netloop.sim.deck import control_steps

RC = "rc\nv1 in 0 dc 1 ac 0\nr1 in out 1k\nc1 out 0 1n\n"
SWEEP = (AcSweep("dec", 5, 1e3, 1e7),)

# A level-1 NMOS common-source stage inside a subcircuit instance (invented model card, for tests only).
STAGE = """stage
.model nch nmos level=1 vto=0.5 kp=100u lambda=0.05 cgso=0.3n cgdo=0.3n tox=10n
.subckt cs in out vdd
m1 out in 0 0 nch w={w} l=1u
rd vdd out 20k
cd out 0 0.2p
.ends
.param w=10u
vdd vdd 0 dc 3
vin g 0 dc 0.9 ac 0
rs g in 50k
x1 in out vdd cs
"""


def _job(netlist: str, alters: tuple[Alter, ...] = (), circuit_id: str = "", save=("v(out)",)) -> SimJob:
    return SimJob(netlist, runs=(AcRun("a", {"v1" if "v1 " in netlist else "vin": 1.0}, SWEEP),), save=save,
                  excitable=("v1" if "v1 " in netlist else "vin",), op_voltages=False, circuit_id=circuit_id, alters=alters)


def _rc(freq_hz: np.ndarray, r_ohm: float, c_f: float) -> np.ndarray:
    return 1 / (1 + 2j * np.pi * freq_hz * r_ohm * c_f)  # circuit theory: RC low-pass, closed form


@pytest.mark.ngspice
def test_alter_changes_one_job_and_reports_the_loaded_value(simulator):
    """An altered capacitor gives the closed form of the changed RC, its loaded value comes back, and the next job on the
    same loaded circuit sees the netlist's value again."""
    altered = simulator.run(_job(RC, (Alter("c1", "capacitance", 1.25),), circuit_id="rc-alter"))
    freq = altered.runs[0].freq_hz
    np.testing.assert_allclose(altered.runs[0].vectors["v(out)"], _rc(freq, 1e3, 1.25e-9), rtol=1e-9)
    assert altered.parameters == {"@c1[capacitance]": pytest.approx(1e-9, rel=1e-15)}
    after = simulator.run(_job(RC, circuit_id="rc-alter"))
    np.testing.assert_allclose(after.runs[0].vectors["v(out)"], _rc(freq, 1e3, 1e-9), rtol=1e-9)
    assert after.parameters == {}


@pytest.mark.ngspice
def test_two_alters_in_one_job(simulator):
    """A resistor and a capacitor altered together give the RC of both changed values (the closed form)."""
    result = simulator.run(_job(RC, (Alter("r1", "resistance", 0.5), Alter("C1", "Capacitance", 3.0)), circuit_id="rc-two"))
    freq = result.runs[0].freq_hz
    np.testing.assert_allclose(result.runs[0].vectors["v(out)"], _rc(freq, 500.0, 3e-9), rtol=1e-9)
    assert result.parameters == {"@r1[resistance]": pytest.approx(1e3), "@c1[capacitance]": pytest.approx(1e-9)}


@pytest.mark.ngspice
def test_altered_transistor_width_inside_an_instance_equals_the_changed_netlist(simulator):
    """Altering W of a MOSFET inside a subcircuit instance (ngspice's m.x1.m1) moves the operating point and the AC
    response exactly as loading the netlist with that W does (ngspice's own load is the reference)."""
    altered = simulator.run(_job(STAGE, (Alter("m.x1.m1", "w", 1.3),), circuit_id="stage"))
    edited = simulator.run(_job(STAGE.replace(".param w=10u", ".param w=13u")))
    nominal = simulator.run(_job(STAGE))
    a, e, n = (r.runs[0].vectors["v(out)"] for r in (altered, edited, nominal))
    np.testing.assert_allclose(a, e, rtol=1e-9)
    assert np.max(np.abs(a - n) / np.abs(n)) > 0.05  # the change is real: W moves the gain
    assert altered.parameters == {"@m.x1.m1[w]": pytest.approx(10e-6, rel=1e-12)}


@pytest.mark.ngspice
def test_unknown_parameter_is_a_clear_error(simulator):
    """Altering a parameter the device does not have fails with ngspice's message, and the next job still runs."""
    with pytest.raises(SimulationError, match="nosuch"):
        simulator.run(_job(RC, (Alter("c1", "nosuch", 2.0),), circuit_id="rc-bad"))
    result = simulator.run(_job(RC, circuit_id="rc-bad"))
    np.testing.assert_allclose(result.runs[0].vectors["v(out)"], _rc(result.runs[0].freq_hz, 1e3, 1e-9), rtol=1e-9)


def test_a_name_that_is_not_a_word_is_refused():
    """A device name carrying ngspice syntax (a space, a bracket) is refused before anything runs."""
    with pytest.raises(SimulationError, match="not a device or parameter name"):
        control_steps(_job(RC, (Alter("c1 ; quit", "capacitance", 2.0),)), write_raw=False)


def test_alters_are_made_after_the_saves_and_undone_after_the_last_run():
    """The control steps keep the loaded value, change it before the first AC and put it back after the last."""
    commands = [s.command for s in control_steps(_job(RC, (Alter("c1", "capacitance", 2.0),)), write_raw=False)]
    first_ac = next(i for i, c in enumerate(commands) if c.startswith("ac "))
    change = commands.index("alter @c1[capacitance] = netloop_alter_0 * 2.0")
    assert commands.index("let netloop_alter_0 = @c1[capacitance]") < change < first_ac
    assert commands[-1] == "alter @c1[capacitance] = netloop_alter_0"


@pytest.mark.ngspice
def test_an_altered_job_writes_nothing_into_the_circuit_s_folder(simulator, tmp_path):
    """The loaded values of altered parameters come back without a file: the job's folder (the user's, where relative
    includes are read) is left as it was, in either backend (batch mode writes its raw files in a folder of its own)."""
    (tmp_path / "keep.txt").write_text("the user's\n")
    job = _job(RC, (Alter("c1", "capacitance", 2.0),), circuit_id="rc-folder")
    result = simulator.run(SimJob(job.netlist, job.runs, job.save, job.excitable, alters=job.alters, circuit_id="rc-folder",
                                  workdir=str(tmp_path)))
    assert result.parameters == {"@c1[capacitance]": pytest.approx(1e-9, rel=1e-15)}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.txt"]
