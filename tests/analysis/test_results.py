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
