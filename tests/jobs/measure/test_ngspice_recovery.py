"""A bench on which ngspice prints an error and recovers, and one with a model parameter ngspice ignores, measured whole."""

from __future__ import annotations

import math

import control
import pytest
from two_pole_loop import ELEMENTS  # tests/two_pole_loop.py (tests/ is on the path with its conftest)

from netloop.jobs.measure import Sweep, measure

LOOP = "behavioural loop: gain 1000, poles 1 kHz and 1 MHz, beside a bias cell ngspice needs gmin stepping for\n" + ELEMENTS + """* the bias cell: sqrt(0.70 - v(c)) is evaluated out of its domain while the operating point is searched
vdd vdd 0 dc 5
r9 vdd c 1k
d9 c 0 dmod
b9 f 0 v = sqrt(0.70-v(c))
r8 f 0 1k
* a model card with a parameter ngspice does not know, on a diode that carries no current
d8 0 vdd dbad
.model dmod d is=1e-14
.model dbad d is=1e-14 cox=3
.end
"""
SWEEP = Sweep(fmin_hz=1.0, fmax_hz=1e9, fmin_given=True, fmax_given=True)


@pytest.mark.ngspice
def test_a_bench_ngspice_recovers_on_is_measured_and_says_how(tmp_path):
    """ngspice prints 'out of range for sqrt' during the operating point and recovers by dynamic gmin stepping: the loop
    is measured (its margins those python-control finds for 1000 / ((1 + s/w1)(1 + s/w2))), the recovery is the
    convergence aid, and the ignored model parameter is among the warnings."""
    path = tmp_path / "bench.cir"
    path.write_text(LOOP)
    r = measure(path, "out", sweep=SWEEP)
    s = control.tf("s")
    _, pm, _, _, _, _ = control.stability_margins(1000 / ((1 + s / (2 * math.pi * 1e3)) * (1 + s / (2 * math.pi * 1e6))))
    assert r.verdict == "pass" and r.analysis.margins.phase_margin_deg == pytest.approx(pm, abs=0.01)
    assert r.sim.convergence_aid == "ngspice: dynamic gmin stepping"
    assert any("converged only with ngspice: dynamic gmin stepping" in w for w in r.warnings)
    assert "ngspice ignored the unrecognized parameter 'cox' of model 'dbad': check the model card (or the level it selects)" in r.warnings
