"""Tian's and Middlebrook's return ratios from the probe's two runs, on closed-form circuits."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from netloop.analysis import middlebrook, sensitivity, tian


def two_port_runs(y11, y12, y21, y22):
    """The probe's two runs on a linear two-port (rows: currents into ports a and b) between a and b.

    Run 1: vb - va = 1 and no shunt, so i_a + i_b = 0. Run 2: va = vb and 1 A into a, so i_a + i_b = 1.
    Returns va1, vb1, ia2 (current arriving at the probe from the driver side = -i_a), ib2 (into b).
    """
    total = y11 + y12 + y21 + y22
    # run 1: va = vb - 1; (y11 + y21) va + (y12 + y22) vb = 0
    vb1 = (y11 + y21) / total
    va1 = vb1 - 1.0
    # run 2: va = vb = v, total * v = 1
    v2 = 1.0 / total
    ib2 = (y21 + y22) * v2
    return va1, vb1, ib2 - 1.0, ib2


def test_ideal_voltage_driver_gives_the_gain_exactly():
    """With an ideal driver va = -A vb and a load Z, both formulas give T = A exactly (ib2 = 0, no NaN)."""
    a_gain = np.array([1e5, 3.0 - 4.0j, -0.5, 1e-9])
    # run 1 (closed form): va = -A vb and vb - va = 1 give vb = 1/(1+A), va = -A/(1+A)
    vb1 = 1.0 / (1.0 + a_gain)
    va1 = -a_gain / (1.0 + a_gain)
    # run 2: va = vb and va = -A vb force v = 0, so no current reaches any load; the driver sinks the 1 A
    ib2 = np.zeros_like(a_gain)
    ia2 = ib2 - 1.0
    np.testing.assert_allclose(tian(va1, vb1, ib2), a_gain, rtol=1e-12)
    np.testing.assert_allclose(middlebrook(va1, vb1, ia2, ib2), a_gain, rtol=1e-12)
    assert np.all(np.isfinite(middlebrook(va1, vb1, ia2, ib2)))


def test_unilateral_transconductor_matches_bode_return_ratio():
    """For a transconductor gm (controlled by vb, drawing gm*vb from a) the return ratio is gm/(Ya+Yb)."""
    # Bode's return ratio of the controlled source (Bode, "Network Analysis and Feedback Amplifier
    # Design", 1945): the closed circuit's determinant is (Ya + Yb + gm) = (Ya + Yb)(1 + T).
    ya, yb, gm = 1e-4 + 2e-5j, 3e-5 - 1e-5j, 2e-3
    va1, vb1, ia2, ib2 = two_port_runs(ya, gm, 0.0, yb)
    expected = gm / (ya + yb)
    np.testing.assert_allclose(tian(va1, vb1, ib2), expected, rtol=1e-12)
    np.testing.assert_allclose(middlebrook(va1, vb1, ia2, ib2), expected, rtol=1e-12)
    np.testing.assert_allclose(1.0 / (1.0 + tian(va1, vb1, ib2)), sensitivity(vb1, ib2), rtol=1e-12)


finite = st.floats(min_value=-10.0, max_value=10.0, allow_nan=False, allow_infinity=False)
admittance = st.builds(complex, finite, finite)


@settings(max_examples=60, derandomize=True, deadline=None)
@given(admittance, admittance, admittance, admittance)
def test_tian_equals_middlebrook_on_any_two_port(y11, y12, y21, y22):
    """Given the same two runs the two formulas agree on random bilateral two-ports (algebraic identity)."""
    total = y11 + y12 + y21 + y22
    assume(abs(total) > 1e-3)  # otherwise the probe's node floats: no solution to compare
    va1, vb1, ia2, ib2 = two_port_runs(y11, y12, y21, y22)
    # T infinite (a singular closed loop) leaves nothing finite to compare
    assume(abs(vb1 + ib2) > 1e-6 and abs(2 * vb1 * ib2 - va1 * ib2 - ia2 * vb1) > 1e-6)
    t_tian = tian(va1, vb1, ib2)
    t_mid = middlebrook(va1, vb1, ia2, ib2)
    np.testing.assert_allclose(t_mid, t_tian, rtol=1e-7, atol=1e-9)
    np.testing.assert_allclose(sensitivity(vb1, ib2) * (1.0 + t_tian), 1.0, rtol=1e-7)


def test_middlebrook_cross_multiplied_equals_textbook_form_where_defined():
    """Where ib2 != 0 the cross-multiplied form equals the textbook (Tv Ti - 1)/(Tv + Ti + 2) (Middlebrook, 1975)."""
    rng = np.random.default_rng(7)
    y = rng.standard_normal((4, 50)) + 1j * rng.standard_normal((4, 50))
    va1, vb1, ia2, ib2 = two_port_runs(*y)
    tv, ti = -va1 / vb1, -ia2 / ib2
    np.testing.assert_allclose(middlebrook(va1, vb1, ia2, ib2), (tv * ti - 1) / (tv + ti + 2), rtol=1e-9)


def test_tian_keeps_relative_precision_for_tiny_loop_gain():
    """Where |T| ~ 1e-12 Tian's form keeps full relative precision (1/S - 1 would lose it all)."""
    t_true = 1e-12 * (1 + 1j)
    vb1 = 1.0 / (1.0 + t_true)
    va1 = -t_true / (1.0 + t_true)
    ib2 = 0.0
    assert abs(tian(va1, vb1, ib2) - t_true) < 1e-9 * abs(t_true)
    # the cancelling form 1/S - 1 loses about four digits here (double precision: eps / |T| ~ 1e-4)
    assert abs((1.0 / sensitivity(vb1, ib2) - 1.0) - t_true) > 1e-6 * abs(t_true)


def test_a_zero_denominator_gives_no_numpy_warning_and_analyse_names_the_sample():
    """vb1 + ib2 = 0 at one sample (what a gain of 1e300 leaves in ngspice's data, issue 15.13) makes that T infinite or
    NaN without a numpy RuntimeWarning (filterwarnings = error would raise it here), by either formula, and analyse()
    refuses the data naming the first such frequency (IEEE 754: x/0 is inf, 0/0 NaN; from memory)."""
    from netloop.analysis import analyse
    from netloop.errors import AnalysisError

    t1 = tian([2.0, 2.0, 2.0, 2.0, 0.0], [1.0, 1.0, 1.0, -1.0, 0.0], [0.0, 0.0, 0.0, 1.0, 0.0])
    t2 = middlebrook([2.0, 0.0], [1.0, 0.0], [-1.0, 0.0], [0.0, 0.0])
    assert np.isinf(t1[3]) and np.isnan(t1[4]) and np.isnan(t2[1]) and t1[0] == -2.0
    with pytest.raises(AnalysisError, match=r"T has 2 NaN or infinite sample\(s\), the first at 4000 Hz"):
        analyse(np.array([1e3, 2e3, 3e3, 4e3, 5e3]), t1)


def test_real_samples_give_a_complex_return_ratio():
    """Samples given as real numbers (a probe at DC, where every phasor is real) still give complex arrays, so that the
    result takes complex updates like any other T: the closed forms T = A of an ideal driver (see above) and S = vb1 + ib2."""
    a_gain = np.array([4.0, 0.5, 100.0])
    vb1, va1 = 1.0 / (1.0 + a_gain), -a_gain / (1.0 + a_gain)
    ib2 = np.zeros(3)
    for t in (tian(va1, vb1, ib2), middlebrook(va1, vb1, ib2 - 1.0, ib2)):
        assert t.dtype == np.complex128
        np.testing.assert_allclose(t, a_gain, rtol=1e-12)
        t += 1j  # a float array refuses this
    s = sensitivity(vb1, ib2)
    assert s.dtype == np.complex128 and np.allclose(s, 1.0 / (1.0 + a_gain))


def test_a_sample_that_overflows_is_left_to_analyse_without_a_warning():
    """A sample whose quotient overflows (a node voltage of 1e300 V over 1e-300) gives an infinite T silently, as the
    module says: analyse() then names the frequency (numpy would warn of the overflow, an error under this suite's filters)."""
    import warnings

    from netloop.analysis import analyse
    from netloop.errors import AnalysisError

    va1, vb1, ib2 = np.array([0.5, 0.5, 1e300, 0.5, 0.5]), np.array([0.5, 0.5, 1e-300, 0.5, 0.5]), np.zeros(5)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        t_tian = tian(va1, vb1, ib2)
        t_mb = middlebrook(va1, vb1, ib2 - 1.0, ib2)
        t_zero = middlebrook(np.array([1.0]), np.array([0.0]), np.array([1.0]), np.array([0.0]))  # 1 / 0
        t_nan = middlebrook(np.array([1.0]), np.array([0.0]), np.array([0.0]), np.array([0.0]))  # 0 / 0
    assert list(np.isfinite(t_tian)) == list(np.isfinite(t_mb)) == [True, True, False, True, True]
    assert not np.isfinite(t_zero[0]) and not np.isfinite(t_nan[0])
    with pytest.raises(AnalysisError, match="3 Hz"):
        analyse(np.array([1.0, 2.0, 3.0, 4.0, 5.0]), t_tian)
