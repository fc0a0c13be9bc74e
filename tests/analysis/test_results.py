"""The result records are frozen, slotted, hold tuples, and the public surface of netloop.analysis is pinned."""

from __future__ import annotations

import dataclasses

import control
import numpy as np
import pytest
from analysis_loops import sample

import netloop.analysis as analysis
from netloop.analysis import LoopAnalysis, analyse


def test_records_are_frozen_slotted_and_hold_tuples():
    """Every record refuses assignment, has no __dict__, and sequences in it are tuples."""
    a = analyse(*sample(control.tf([25], [1, 10, 10, 10]), 1e-4, 1e3))
    for record in (a, a.margins, a.gain_crossovers[0], a.phase_crossovers[0], a.nyquist, a.poles, a.peaking, a.second_order):
        assert dataclasses.is_dataclass(record) and not hasattr(record, "__dict__")
        with pytest.raises(dataclasses.FrozenInstanceError):
            setattr(record, dataclasses.fields(record)[0].name, None)
    for seq in (a.gain_crossovers, a.phase_crossovers, a.ignored_phase_crossovers, a.warnings, a.nyquist.reasons, a.poles.poles_rad_s):
        assert isinstance(seq, tuple)
    assert a.stable is a.nyquist.stable


def test_loop_analysis_equality_ignores_the_arrays():
    """Two analyses of the same data compare equal (the numpy arrays are left out of == and hash)."""
    f, t = sample(control.tf([25], [1, 10, 10, 10]), 1e-4, 1e3)
    assert analyse(f, t, fit_poles=False) == analyse(f.copy(), t.copy(), fit_poles=False)
    assert {f.name for f in dataclasses.fields(LoopAnalysis) if not f.compare} == {"freq_hz", "t"}


def test_public_surface_is_pinned():
    """netloop.analysis exports exactly this sorted list of names."""
    assert analysis.__all__ == sorted(analysis.__all__)
    assert set(analysis.__all__) == {
        "Check", "DEFAULT_FLOOR_DB", "ClosedLoopPoles", "GainCrossover", "LoopAnalysis", "Margins", "NyquistVerdict",
        "Peaking", "PhaseCrossover", "Refinement", "Requirement", "RequirementOutcome", "SecondOrderEstimate",
        "analyse", "middlebrook", "parse_requirement", "parse_requirements", "propose_frequencies", "refine",
        "sensitivity", "tian",
    }  # fmt: skip
    for name in analysis.__all__:
        assert hasattr(analysis, name)


def test_phase_property_is_the_branch_the_margins_were_read_on():
    """LoopAnalysis.phase_deg at the crossover sample reproduces the reported phase; a triple integrator starts near -270."""
    s = control.tf("s")
    loop = 50 * (s + 1) ** 2 / s**3 / (s / 100 + 1) ** 2  # conditionally stable, three poles at DC
    a = analyse(*sample(loop, 1e-3, 1e5), fit_poles=False)
    assert a.phase_deg[0] == pytest.approx(-270.0, abs=1.0)  # closed form: three poles at s = 0 give -270 deg far below the zeros
    c = a.gain_crossovers[0]
    i = int(np.argmin(np.abs(a.freq_hz - c.freq_hz)))
    assert a.phase_deg[i] == pytest.approx(c.phase_deg, abs=2.0)  # the nearest sample, 1/20 decade away
    assert 180 - abs(c.phase_deg) == pytest.approx(c.phase_margin_deg)


def _with_bottom(a: LoopAnalysis, bottom, freq_hz=(1.0, 10.0, 100.0)) -> LoopAnalysis:
    """``a`` with its first samples replaced: T = ``bottom`` at ``freq_hz`` (one decade apart), the rest as analysed."""
    n = len(bottom)
    f = np.concatenate([np.asarray(freq_hz, dtype=float)[:n], a.freq_hz[a.freq_hz > 1e3]])
    t = np.concatenate([np.asarray(bottom, dtype=complex), a.t[a.freq_hz > 1e3]])
    return dataclasses.replace(a, freq_hz=f, t=t)


def test_the_dc_gain_stands_for_dc_only_where_t_is_flat_and_on_the_real_axis_at_the_bottom():
    """LoopAnalysis.gain_is_dc, as its docstring rules it: no pole at s = 0, |T| within 1 dB a decade over the lowest 3
    samples, its phase within 10 deg of 0 or 180 deg, and no AC coupling (a lead beyond 1 deg where |T| > 1). The
    bottoms are written here (by construction); the reference is that rule."""
    a = analyse(*sample(control.tf([1e4], [1e-3, 1]), 1e-1, 1e6), fit_poles=False)  # a pole at 159 Hz: flat from 0.1 Hz
    assert a.gain_is_dc and a.nyquist.origin_poles == 0

    def deg(x):
        return np.exp(1j * np.radians(x))

    cases = {
        "flat": ([100, 100, 100], True),
        "a lead where |T| > 1 (AC coupling)": ([100 * deg(5)] * 3, False),
        "the same lead where |T| < 1": ([0.5 * deg(5)] * 3, True),
        "just above 1 at the bottom, below 1 next": ([1.001 * deg(5), 0.999 * deg(5), 0.999 * deg(5)], False),
        "leading at the bottom only": ([2 * deg(5), 2 * deg(-5), 2 * deg(-5)], False),
        "positive real part at the bottom only": ([1.001 * deg(5), 0.999 * deg(185), 0.999 * deg(5)], False),
        "negative DC (180 deg), off by 5": ([-100 * deg(5)] * 3, True),
        "15 deg off the axis": ([100 * deg(-15)] * 3, False),
        "5 deg off at the bottom, 20 next": ([0.5 * deg(-5), 0.5 * deg(-20), 0.5 * deg(-20)], True),
        "rising 2 dB a decade": ([100, 100 * 10 ** (2 / 20), 100 * 10 ** (4 / 20)], False),
        "rising 0.97 dB a decade": ([100, 100 * 10 ** (0.97 / 20), 100 * 10 ** (1.94 / 20)], True),
        "a zero among the lowest 3": ([100, 100, 0], False),
        "on the imaginary axis": ([100j, 100j, 100j], False),
        "5 deg off at the bottom, 80 next": ([0.5 * deg(-5), 0.5 * deg(-80), 0.5 * deg(-80)], True),
        "|T| exactly 1, leading 2 deg": ([complex(0.9993906021118164, 0.034905936609423115)] * 3, True),  # not above 1
    }
    assert abs(cases["|T| exactly 1, leading 2 deg"][0][0]) == 1.0
    got = {name: _with_bottom(a, bottom).gain_is_dc for name, (bottom, _) in cases.items()}
    assert got == {name: want for name, (_, want) in cases.items()}
    assert _with_bottom(a, [100, 100, 100, 0], (1.0, 10.0, 100.0, 300.0)).gain_is_dc  # only the lowest 3 samples count
    three = dataclasses.replace(a, freq_hz=np.array([1.0, 10.0, 100.0]), t=np.full(3, 100.0 + 0j))
    assert three.gain_is_dc and not dataclasses.replace(three, freq_hz=three.freq_hz[:2], t=three.t[:2]).gain_is_dc
    integrating = dataclasses.replace(a, nyquist=dataclasses.replace(a.nyquist, origin_poles=1))
    assert not integrating.gain_is_dc


def test_the_largest_gain_and_the_phase_branch_of_a_positive_feedback_integrator():
    """largest_gain_db is the largest |T| swept, in dB; T = -10/s (a pole at s = 0, negative at DC) sits on the branch of
    its asymptote C / s with arg C = -180 deg: -270 deg, where the branch of a loop without a pole at 0 would put +90."""
    f, t = sample(control.tf([0.1], [1e-3, 1]), 1e-1, 1e6)  # never reaches 0 dB: 0.1 at DC
    assert analyse(f, t, fit_poles=False).largest_gain_db == pytest.approx(20 * np.log10(np.max(np.abs(t))), abs=1e-12)
    assert analyse(f, t, fit_poles=False).largest_gain_db == pytest.approx(-20.0, abs=1e-3)
    notch = dataclasses.replace(analyse(f, t, fit_poles=False), t=np.where(np.arange(t.size) == 40, 0, t))
    assert notch.largest_gain_db == pytest.approx(-20.0, abs=1e-3)  # a sample at exactly 0 (a notch on it) is -6000 dB, not NaN
    a = analyse(*sample(control.tf([-10], [1, 0]), 1e-2, 1e3), fit_poles=False)
    assert a.nyquist.origin_poles == 1 and a.phase_deg[0] == pytest.approx(-270.0, abs=1e-9)
