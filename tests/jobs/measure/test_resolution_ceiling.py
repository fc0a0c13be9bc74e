"""The sweep is not widened below where |T| exceeds what the data resolves: a charge-pump PLL with a leak on its filter."""

from __future__ import annotations

import math

import control
import numpy as np
import pytest

from netloop.jobs.measure import RESOLVED_MAX_DB, Sweep, measure

pytestmark = pytest.mark.ngspice

PI = 3.14159265358979  # as the netlist writes it
ICP, KVCO, N, RZ, CZ, CP, RLEAK = 100e-6, 2 * PI * 100e6, 100, 13e3, 200e-12, 20e-12, 1e12

# A linearised type-II charge-pump PLL in the phase domain (our own, invented values), drawn as a designer draws it:
# PFD and charge pump as a G source of Icp/(2 pi) A/rad, a series Rz-Cz filter with a ripple cap Cp, the VCO as a G
# source into a 1 F integrator, the divider as an E gain of 1/N; both integrator nodes get a 1 T resistor to ground for
# the operating point. Break at div (driven by Ediv, read only by Gcp's control input).
PLL = f"""phase-domain charge-pump PLL, leaky integrators (invented)
Vref ref 0 dc 0 ac 1
Gcp 0 vc ref div {ICP / (2 * PI)!r}
Rz vc z {RZ!r}
Cz z 0 {CZ!r}
Cp vc 0 {CP!r}
Rvc vc 0 {RLEAK!r}
Gvco 0 theta vc 0 {KVCO!r}
Cvco theta 0 1
Rleak theta 0 {RLEAK!r}
Ediv div 0 theta 0 {1 / N!r}
.end
"""


def _closed_form(freq_hz: np.ndarray) -> np.ndarray:
    """T(j 2 pi f) = Icp/(2 pi) Z(s) Kvco/(s + 1/Rleak) / N, Z = Rvc || 1/(s Cp) || (Rz + 1/(s Cz))."""
    s = 2j * math.pi * np.asarray(freq_hz)
    z = 1.0 / (1.0 / RLEAK + s * CP + 1.0 / (RZ + 1.0 / (s * CZ)))
    return ICP / (2 * PI) * z * KVCO / (s + 1.0 / RLEAK) / N


def test_a_pll_with_a_leaky_filter_node_is_measured_where_its_data_resolves_t():
    """Broken at div, the PLL passes with python-control's phase margin and crossover, no phase crossover (its phase
    rises from -180 deg), and every sample within 0.5 % of the closed form: the sweep stops where |T| passes 240 dB
    instead of widening to 1 uHz, where |T| saturates near 1/eps and its phase jumps (before: INCONCLUSIVE there)."""
    result = measure(PLL, "div")
    a = result.analysis
    assert result.verdict == "pass", [c.detail for c in a.checks if not c.passed]
    # Reference: python-control 0.10 margin() of the same closed form as a transfer function (56.3862 deg at 190.16 kHz)
    s = control.tf("s")
    z = 1 / (1 / RLEAK + s * CP + 1 / (RZ + 1 / (s * CZ)))
    t_ref = ICP / (2 * PI) * z * (KVCO / (s + 1 / RLEAK)) / N
    _, pm_ref, _, wc_ref = control.margin(t_ref)
    assert a.margins.phase_margin_deg == pytest.approx(pm_ref, abs=1e-3)
    assert a.margins.unity_gain_hz == pytest.approx(wc_ref / (2 * math.pi), rel=1e-5)
    assert a.margins.gain_margin_db is None and a.margins.lower_gain_margin_db is None and not a.phase_crossovers
    assert a.nyquist.stable and a.nyquist.reliable
    gain_db = 20 * np.log10(np.abs(a.t))
    assert gain_db[0] > RESOLVED_MAX_DB and gain_db[1] <= gain_db[0]  # stopped at the first bottom beyond the ceiling
    ref = _closed_form(a.freq_hz)
    assert np.max(np.abs(a.t - ref) / np.abs(ref)) < 5e-3


def test_a_sweep_started_where_t_is_rounding_noise_asks_to_start_higher_not_to_sample_more_densely():
    """With --fmin 1 uHz given, the PLL's T saturates near 1/eps below 1 mHz and its phase jumps there: the verdict is
    INCONCLUSIVE, and it says to start the sweep higher; before, it said to raise --ppd, which samples the same jump."""
    result = measure(PLL, "div", sweep=Sweep(fmin_hz=1e-6, fmin_given=True))
    (check,) = [c for c in result.analysis.checks if not c.passed]
    assert result.verdict == "inconclusive" and check.name == "nyquist-data"
    assert f"where |T| is above {RESOLVED_MAX_DB:g} dB" in check.detail and check.detail.endswith("start the sweep higher")
    assert check.advice == "let the sweep start where |T| is below 240 dB (raise --fmin)"
    assert not result.analysis.nyquist.coarse_hz  # nothing for the refinement to sample more densely

