"""The composed job, netlist to margins through real ngspice, against closed forms of behavioural loops."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from netloop.jobs.measure import Sweep, measure

pytestmark = pytest.mark.ngspice

A0 = 1000.0
F1, F2, F3 = 1e3, 1e6, 5e6


def _loop_netlist(poles_hz: tuple[float, ...], gain: float) -> str:
    """An error amplifier E0 = gain * (ref - out) followed by buffered RC poles back to out."""
    lines = ["behavioural loop with real poles", "vref ref 0 dc 0.5", f"e0 n0 0 ref out {gain}"]
    prev = "n0"
    for k, f in enumerate(poles_hz, start=1):
        node = "out" if k == len(poles_hz) else f"p{k}"
        lines += [f"r{k} {prev} {node} 1k", f"c{k} {node} 0 {1 / (2 * math.pi * 1e3 * f):.17g}"]
        if node != "out":
            lines.append(f"eb{k} b{k} 0 {node} 0 1")
            prev = f"b{k}"
    return "\n".join(lines) + "\n.end\n"


def _closed_form(poles_hz, gain):
    def t(f):
        s = 2j * math.pi * np.asarray(f, dtype=float)
        out = gain * np.ones_like(s)
        for p in poles_hz:
            out = out / (1 + s / (2 * math.pi * p))
        return out

    return t


def test_two_pole_loop_phase_margin_matches_closed_form(tmp_path):
    """The measured phase margin and crossover of a two-pole loop equal the closed form's within 1e-3 deg."""
    path = tmp_path / "two_pole.cir"
    path.write_text(_loop_netlist((F1, F2), A0))
    t = _closed_form((F1, F2), A0)
    # exact crossover: |T(fc)| = 1, solved on the closed form T(s) = A0 / ((1 + s/w1)(1 + s/w2)) (circuit theory)
    fc = brentq(lambda f: abs(t(f)) - 1.0, 1e3, 1e8, xtol=1e-6, rtol=1e-14)
    pm = 180.0 + math.degrees(np.angle(t(fc)))
    result = measure(path, "out")
    m = result.analysis.margins
    assert m.phase_margin_deg == pytest.approx(pm, abs=1e-3)
    assert m.unity_gain_hz == pytest.approx(fc, rel=1e-5)
    assert result.analysis.dc_gain_db == pytest.approx(20 * math.log10(A0), abs=1e-6)
    assert result.stable and result.passed
    assert result.breaks.silenced_sources == ()


def test_two_pole_loop_matches_python_control(tmp_path):
    """python-control's stability_margins on the same closed-form T agrees with the measured margins."""
    control = pytest.importorskip("control")
    path = tmp_path / "three_pole.cir"
    poles = (F1, F2, F3)
    path.write_text(_loop_netlist(poles, A0))
    w = [2 * math.pi * p for p in poles]
    # python-control 0.10 stability_margins on the transfer function A0 / prod(1 + s/w_k)
    sys = control.tf([A0], [1.0])
    for wk in w:
        sys = sys * control.tf([1.0], [1 / wk, 1.0])
    gm, pm, _sm, wpc, wgc, _wms = control.stability_margins(sys)
    result = measure(path, "out", method="middlebrook")
    m = result.analysis.margins
    assert m.phase_margin_deg == pytest.approx(pm, abs=1e-3)
    assert m.unity_gain_hz == pytest.approx(wgc / (2 * math.pi), rel=1e-5)
    assert m.gain_margin_db == pytest.approx(20 * math.log10(gm), abs=1e-3)
    assert m.phase_crossover_hz == pytest.approx(wpc / (2 * math.pi), rel=1e-5)


def test_unstable_loop_is_unstable_with_the_right_pole_count(tmp_path):
    """A three-pole loop with too much gain is unstable, with as many RHP poles as 1 + T has RHP zeros."""
    gain = 2e5
    poles = (F1, F2, F3)
    path = tmp_path / "unstable.cir"
    path.write_text(_loop_netlist(poles, gain))
    # reference: roots of the closed-loop characteristic polynomial prod(1 + s/w_k) + gain (numpy.roots)
    char = np.array([1.0])
    for p in poles:
        char = np.polymul(char, [1 / (2 * math.pi * p), 1.0])
    char = np.polyadd(char, [gain])
    rhp = int(np.sum(np.roots(char).real > 0))
    result = measure(path, "out", requirements=["pm>=45"])
    assert rhp == 2
    assert not result.stable
    assert result.analysis.nyquist.closed_loop_rhp_poles == rhp
    assert result.analysis.poles is not None and result.analysis.poles.rhp_count == rhp
    assert not result.passed


def test_fixed_sweep_is_not_widened(tmp_path):
    """Limits the user gave are kept: the data starts and ends exactly there."""
    path = tmp_path / "two_pole.cir"
    path.write_text(_loop_netlist((F1, F2), A0))
    result = measure(path, "out", sweep=Sweep(fmin_hz=10.0, fmax_hz=1e7, fmin_given=True, fmax_given=True, refine=False))
    f = result.analysis.freq_hz
    assert f[0] == pytest.approx(10.0)
    assert f[-1] == pytest.approx(1e7)


class _CountingLoads:
    """The default simulator, counting the jobs for which ngspice read a netlist (SimResult.loaded)."""

    def __init__(self, simulator):
        self.simulator, self.loads = simulator, 0

    def run(self, job):
        result = self.simulator.run(job)
        self.loads += result.loaded
        return result

    def __getattr__(self, name: str):
        return getattr(self.simulator, name)


@pytest.mark.ngspice
def test_loads_count_every_netlist_ngspice_read_for_the_measurement():
    """A regulator whose supply sits below its reference (invented operating point, sky130 cards) measures no loop at the
    rules' split, so netloop measures the other placement of its bridge too, on the same loaded circuit (both probes are
    in one netlist, netloop.probe.chain): SimInfo.loads is exactly the loads the simulator reports (ngspice's
    SimResult.loaded, counted job by job), one for both splits."""
    from netloop.sim import default_simulator

    process = Path(__file__).resolve().parents[3] / "circuits" / "sky130" / "process.spice"
    netlist = "\n".join([
        "regulator below dropout (invented operating point)", ".param vin=0.9 vref=0.9", f".lib {process} tt",
        "Vsup vin 0 dc {vin}", "Vref ref 0 dc {vref}", "Ibias vin nbias dc 10u",
        "XM8 nbias nbias 0 0 sky130_fd_pr__nfet_01v8 w=4 l=1", "XM5 tail nbias 0 0 sky130_fd_pr__nfet_01v8 w=8 l=1",
        "XM1 d1 fb tail 0 sky130_fd_pr__nfet_01v8 w=8 l=1", "XM2 gate ref tail 0 sky130_fd_pr__nfet_01v8 w=8 l=1",
        "XM3 d1 d1 vin vin sky130_fd_pr__pfet_01v8 w=8 l=1", "XM4 gate d1 vin vin sky130_fd_pr__pfet_01v8 w=8 l=1",
        "XMP vout gate vin vin sky130_fd_pr__pfet_01v8 w=20 l=0.5 m=100", "R1 vout fb 25k", "R2 fb 0 50k", "C1 vout fb 200f",
        "Cout vout cesr 1u", "Resr cesr 0 1", "Iload vout 0 dc 5m", ".end", ""])
    simulator = default_simulator()
    try:
        counting = _CountingLoads(simulator)
        result = measure(netlist, "gate", simulator=counting)
    finally:
        simulator.close()
    split = next(c for c in result.checks if c.name == "split")
    assert "tried xm2 to the load side" in split.detail  # the other placement was measured
    assert result.sim.loads == counting.loads == 1


def test_an_unknown_method_is_refused_by_name():
    """A method other than Tian's or Middlebrook's is refused with the name given and the two known."""
    from netloop.errors import NetloopError  # noqa: PLC0415

    netlist = "one-pole loop (invented)\nvref ref 0 dc 0.5\ne0 n0 0 ref out 1000\nr1 n0 out 1k\nc1 out 0 1n\n.end\n"
    with pytest.raises(NetloopError) as refused:
        measure(netlist, "out", method="nyquist")
    assert str(refused.value) == "unknown method 'nyquist'; expected one of tian, middlebrook"
