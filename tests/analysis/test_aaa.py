"""netloop's copy of scipy's AAA fit (netloop.analysis.aaa) gives scipy.interpolate.AAA's results bit for bit."""

from __future__ import annotations

import math
import warnings
from pathlib import Path

import numpy as np
import pytest

import netloop.analysis.aaa as copy
import netloop.analysis.poles as poles_module
from netloop.analysis.aaa import Rational, aaa
from netloop.analysis.poles import closed_loop_poles

DATA = Path(__file__).parent / "data" / "rc_ladder_100k_T.csv"


def _bits(a) -> tuple:
    """An array's dtype, shape and bytes: equal only when every number is the same to the bit (sign of zero, NaN)."""
    a = np.asarray(a)
    return a.dtype, a.shape, a.tobytes()


def _scipy(z, y, rtol, terms):
    """scipy's AAA without clean-up (the reference), and its warnings (category and message, in order)."""
    from scipy.interpolate import AAA

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fit = AAA(z, y, rtol=rtol, max_terms=terms, clean_up=False)
    return fit, [(w.category, str(w.message)) for w in caught]


def _ours(z, y, rtol, terms):
    """netloop's copy, and its warnings (category and message, in order)."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fit = aaa(z, y, rtol, terms)
    return fit, [(w.category, str(w.message)) for w in caught]


def _assert_scipys(z, y, rtol, terms):
    """The copy's support points, values, weights, errors, poles, residues, roots and warnings (category and message)
    equal scipy's; returns both fits and whether scipy warned."""
    ours, our_warnings = _ours(z, y, rtol, terms)
    theirs, their_warnings = _scipy(z, y, rtol, terms)
    assert our_warnings == their_warnings
    for name in ("support_points", "support_values", "weights", "errors"):
        assert _bits(getattr(ours, name)) == _bits(getattr(theirs, name)), name
    with np.errstate(all="ignore"):
        for name in ("poles", "residues", "roots"):
            assert _bits(getattr(ours, name)()) == _bits(getattr(theirs, name)()), name
    return ours, theirs, bool(their_warnings)


def _sweep():
    """10 mHz to 10 GHz, ten points a decade (netloop's default first sweep)."""
    return np.logspace(-2, 10, 121)


def _loops() -> dict[str, np.ndarray]:
    """T(j 2 pi f) of closed-form loops (circuit theory: products of first-order sections, a delay, an unstable pole)."""
    f = _sweep()
    s = 2j * math.pi * f
    w = 2 * math.pi
    return {
        "one pole": 1e3 / (1 + s / (w * 1e5)),
        "two poles": 1e4 / ((1 + s / (w * 10)) * (1 + s / (w * 1e7))),
        "three poles, ringing": 1e3 / ((1 + s / (w * 1e3)) * (1 + s / (w * 1e6)) ** 2),
        "integrator": w * 1e6 / s / (1 + s / (w * 3e6)),
        "unstable open loop": 10.0 / (s / (w * 1e4) - 1),
        "delay": 1e2 * np.exp(-s * 2e-9) / (1 + s / (w * 1e4)),
    }


def _fits_made_by(freq_hz, t) -> list[tuple]:
    """Every (z, y, rtol, max_terms) closed_loop_poles hands to the fit for this data: the mirrored, scaled samples of
    1/(1+T), the first fit and any refit."""
    made = []

    def record(z, y, rtol, terms):
        made.append((z.copy(), y.copy(), rtol, terms))
        return aaa(z, y, rtol, terms)

    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(poles_module, "aaa", record)
        closed_loop_poles(freq_hz, t, nyquist_rhp=0)
    return made


@pytest.mark.parametrize("name", list(_loops()))
def test_closed_form_loops_fit_as_scipy_fits_them(name):
    """On 1/(1+T) of closed-form loops, sampled as closed_loop_poles samples it (mirror images, scaled s), every fit it
    makes equals scipy's AAA bit for bit: support points, values, weights, errors, poles, residues and roots."""
    made = _fits_made_by(_sweep(), _loops()[name])
    assert made
    for z, y, rtol, terms in made:
        _assert_scipys(z, y, rtol, terms)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_noisy_data_fits_as_scipy_fits_it_up_to_the_last_term(seed):
    """With relative noise of 1e-7 (seeded) the first fit runs to its last term without converging, and closed_loop_poles
    fits again; every fit equals scipy's, its not-converged warning included."""
    f = _sweep()
    rng = np.random.default_rng(seed)
    t = _loops()["two poles"] * (1 + 1e-7 * (rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size)))
    made = _fits_made_by(f, t)
    warned = [_assert_scipys(*fit)[2] for fit in made]
    assert warned[0] and len(made) >= 2
    first = made[0]
    assert _scipy(*first)[0].errors.size == first[3]  # ran to max_terms


def test_measured_data_fits_as_scipy_fits_it():
    """On T measured through ngspice (a 100000-element RC ladder loop, noisy at the top of the sweep) every fit
    closed_loop_poles makes equals scipy's."""
    data = np.genfromtxt(DATA, delimiter=",", names=True, skip_header=2)  # two lines say where the data come from
    for fit in _fits_made_by(data["freq_hz"], data["re"] + 1j * data["im"]):
        _assert_scipys(*fit)


def test_the_ill_conditioned_step_is_scipys():
    """Data of an exact low-degree rational function makes the last steps' Loewner matrix rank-deficient, where scipy
    normalises its columns before the SVD: the copy equals scipy there, and with that branch switched off it does not
    (so the other tests' clean loops pass through it)."""
    z, y, rtol, terms = _fits_made_by(_sweep(), _loops()["one pole"])[0]
    _assert_scipys(z, y, rtol, terms)
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(copy, "_ILL_CONDITIONED", math.inf)
        ours, _ = _ours(z, y, rtol, terms)
    theirs, _ = _scipy(z, y, rtol, terms)
    assert _bits(ours.weights) != _bits(theirs.weights)


def test_fewer_rows_than_columns_is_scipys_own():
    """Fewer points than twice the terms (30 points, 20 terms, a function no rational fits exactly): scipy reaches its
    null-space branch, and the copy hands the fit to scipy, whose object it returns (its own copy of that branch would
    give other weights)."""
    import scipy.linalg

    z = np.exp(2j * math.pi * np.arange(30) / 200)
    y = np.exp(z)
    calls = []
    null_space = scipy.linalg.null_space
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(scipy.linalg, "null_space", lambda *a, **k: calls.append(a) or null_space(*a, **k))
        ours, theirs, _ = _assert_scipys(z, y, 0.0, 20)
    assert calls and not isinstance(ours, Rational)
    unique = np.unique(z, return_index=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # not converged
        stepped = Rational(*copy._iterate(unique[0], y[unique[1]], 0.0, 20))
    assert _bits(stepped.weights) != _bits(theirs.weights)


@pytest.mark.parametrize(("rtol", "terms"), [(1e-13, 100), (0.0, 60)])
def test_scipys_spiral_fits_as_scipy_fits_it(rtol, terms):
    """scipy's own example and test of AAA: tan(pi z / 2) on a spiral of 1000 points winding 7.5 times around 0, with
    rtol 1e-13 (twelve steps, scipy's docstring) and with rtol 0, which drives it to Froissart doublets
    (scipy's test_bary_rational.py): the copy equals scipy's fit before its clean-up."""
    z = np.exp(np.linspace(-0.5, 0.5 + 15j * np.pi, num=1000))
    ours, _, warned = _assert_scipys(z, np.tan(np.pi * z / 2), rtol, terms)
    assert ours.errors.size == (12 if rtol else terms) and warned == (rtol == 0.0)


def test_zero_weights_are_left_out_as_scipy_leaves_them_out():
    """Data of two levels (2 at every third point, 1 elsewhere) gives steps whose Loewner matrix has columns on disjoint
    rows, and weights exactly 0: their support points leave the numerator and denominator, and their residuals are not
    0, so only the unused points may be chosen next; the copy equals scipy there."""
    z = 1j * np.linspace(-1.0, 1.0, 40)
    y = np.where(np.arange(40) % 3 == 0, 2.0, 1.0) + 0j
    zero_weights = []
    weights = copy._weights
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(copy, "_weights", lambda *a: zero_weights.append(np.any(weights(*a)[0] == 0)) or weights(*a))
        _assert_scipys(z, y, 1e-13, 10)
    assert any(zero_weights)


def test_a_zero_column_fails_as_scipy_fails():
    """One value apart from equal others: a step's Loewner column is 0 at every unused point, the step is
    ill-conditioned, and normalising its columns divides 0 by 0; scipy's SVD refuses the NaN, and so does the copy,
    with scipy's error and warning."""
    z = 1j * np.linspace(-1.0, 1.0, 40)
    y = np.ones(40, dtype=complex)
    y[17] = 2.0
    with pytest.raises(ValueError, match="A has a NaN entry"):
        _scipy(z, y, 1e-13, 10)
    with warnings.catch_warnings(record=True) as caught, pytest.raises(ValueError, match="A has a NaN entry"):
        warnings.simplefilter("always")
        aaa(z, y, 1e-13, 10)
    assert [str(w.message) for w in caught] == ["invalid value encountered in divide"]


def test_missing_values_and_repeated_points_are_dropped_as_scipy_drops_them():
    """A NaN and an infinite value are left out and a repeated point kept once (the first), as scipy does."""
    z, y, rtol, terms = _fits_made_by(_sweep(), _loops()["two poles"])[0]
    y = y.copy()
    y[[5, 70]] = np.nan, np.inf
    z, y = np.concatenate([z, z[100:103]]), np.concatenate([y, 2 * y[100:103]])
    ours, _, _ = _assert_scipys(z, y, rtol, terms)
    assert isinstance(ours, Rational)


def test_other_inputs_are_scipys_own():
    """Real data, scipy's default tolerance, a point at infinity and no terms at all go to scipy: its fit, or its error."""
    x = np.linspace(-1.0, 1.0, 50)
    for z, y, rtol in ((x, np.exp(x), 1e-13), (1j * x, np.exp(1j * x), None)):
        ours, _, _ = _assert_scipys(z, y, rtol, 20)
        assert not isinstance(ours, Rational)
    for z, terms in ((np.append(1j * x, np.inf), 20), (1j * x, 0)):
        y = np.ones(z.size, dtype=complex)
        with pytest.raises(ValueError) as theirs:
            _scipy(z, y, 1e-10, terms)
        with pytest.raises(ValueError, match=str(theirs.value).replace("`", ".")):
            aaa(z, y, 1e-10, terms)


@pytest.mark.parametrize("shape", [(270, 1), (270, 6)])
def test_the_svd_is_scipys_routine_with_scipys_work_size(shape):
    """The SVD of a step calls the LAPACK routine scipy.linalg.svd calls for the step's matrix, with the work size
    scipy computes for it (scipy.linalg.lapack: get_lapack_funcs, _compute_lwork)."""
    from scipy.linalg.lapack import _compute_lwork, get_lapack_funcs

    a = np.ones(shape, dtype=complex)
    gesdd, gesdd_lwork = get_lapack_funcs(("gesdd", "gesdd_lwork"), (a,), ilp64="preferred")
    assert copy._gesdd(*shape) == (gesdd, _compute_lwork(gesdd_lwork, *shape, compute_uv=True, full_matrices=False))


def test_the_not_converged_warning_is_scipys_word_for_word():
    """A fit that runs out of terms warns as scipy's does: a RuntimeWarning naming the number of terms, and nothing else."""
    z, y, rtol, _ = _fits_made_by(_sweep(), _loops()["two poles"])[0]
    _, _, warned = _assert_scipys(z, y, rtol, 3)  # three terms cannot reach the tolerance
    assert warned and _ours(z, y, rtol, 3)[1] == [(RuntimeWarning, "AAA failed to converge within 3 iterations.")]


def test_zero_data_stop_at_one_term_as_scipy_stops():
    """Values all 0 are fitted exactly by the first term (error 0, which meets rtol=0: scipy stops on error <= atol), and
    its weight, 1 from the SVD of a zero column, is kept; the copy equals scipy."""
    z = 1j * np.linspace(-1.0, 1.0, 40)
    ours, _, warned = _assert_scipys(z, np.zeros(40, dtype=complex), 0.0, 10)
    assert isinstance(ours, Rational) and ours.errors.tolist() == [0.0] and ours.weights.tolist() == [1.0] and not warned


def test_constant_data_tie_every_singular_value_as_scipy_ties_them():
    """Values all 1 leave every Loewner matrix 0: all its singular values are the smallest (0), scipy sums their vectors
    and divides by the square root of their count, and its 0/0 test of conditioning warns of nothing; the copy equals
    scipy up to its last term (weights of modulus 1/sqrt(10) at the tenth)."""
    z = 1j * np.linspace(-1.0, 1.0, 64)
    ours, _, warned = _assert_scipys(z, np.ones(64, dtype=complex), 0.0, 10)
    assert isinstance(ours, Rational) and warned
    np.testing.assert_allclose(np.abs(ours.weights), 1 / math.sqrt(10), rtol=1e-15)  # V of a 0 matrix is I: rows summed, / sqrt(10)


@pytest.mark.parametrize("case", ["complex points, real values", "real points, complex values"])
def test_mixed_real_and_complex_data_fit_in_the_copy_as_scipy_fits_them(case):
    """A real array on either side (|T| on the imaginary axis; T against a real frequency) is complex128 data to scipy:
    the copy fits it itself, in complex arithmetic, and equals scipy."""
    f = np.logspace(0.0, 3.0, 40)
    t = 1 / ((1 + 1j * f / 50) * (1 + 1j * f / 300))  # two real poles (circuit theory)
    z, y = (1j * f, np.abs(t)) if case.startswith("complex") else (f, t)
    ours, _, _ = _assert_scipys(z, y, 1e-13, 10)
    assert isinstance(ours, Rational) and ours.support_points.dtype == ours.weights.dtype == np.complex128


def test_single_precision_data_go_to_scipy():
    """complex64 data are fitted by scipy in single precision (its dtype is result_type(z, f, 1.0)); the copy, made for
    complex128, hands them to scipy and returns its fit."""
    f = np.logspace(0.0, 3.0, 40)
    z = (1j * f).astype(np.complex64)
    ours, _, _ = _assert_scipys(z, (1 / (1 + z / 50)).astype(np.complex64), 1e-6, 10)
    assert not isinstance(ours, Rational)


@pytest.mark.parametrize(("points", "terms"), [(40, 1), (40, 20)])
def test_one_term_and_exactly_two_points_a_term_fit_in_the_copy(points, terms):
    """One term, and exactly twice as many points as terms (the last step's Loewner matrix square, which scipy still
    takes by SVD): the copy fits them itself and equals scipy, its not-converged warning included."""
    s = 1j * np.logspace(0.0, 3.0, points)
    ours, _, warned = _assert_scipys(s, 1 / ((1 + s / 50) * (1 + s / 300)), 0.0, terms)
    assert isinstance(ours, Rational) and ours.errors.size == terms and warned


class _FailingLapack:
    """A stand-in for LAPACK's gesdd or ggev that reports ``info`` (a failure that real data cannot be made to give on
    demand), with gesdd's or ggev's outputs."""

    typecode = "z"

    def __init__(self, info: int):
        self.info = info

    def __call__(self, a, *args, lwork=None, **kwargs):
        if args:  # ggev, given the pencil's b (and, after its work-size query, its flags) by position; gesdd by keyword
            n = a.shape[0]
            return np.zeros(n, complex), np.ones(n, complex), None, None, np.array([4.0 + 0j]), 0 if lwork == -1 else self.info
        return None, np.ones(a.shape[1]), np.eye(a.shape[1], dtype=complex), self.info


def _message(call):
    """The type and text of the error ``call`` raises."""
    with pytest.raises(Exception) as raised:  # noqa: PT011 - compared with scipy's own below
        call()
    return type(raised.value), str(raised.value)


@pytest.mark.parametrize("info", [1, 2, -3, -4])
def test_lapack_failures_raise_scipys_errors(info):
    """gesdd and ggev reporting a failure (info > 0: not converged; info < 0: an illegal argument, -4 for gesdd a NaN)
    raise the error scipy.linalg.svd and scipy.linalg.eigvals raise for the same report, type and words."""
    import scipy.linalg._decomp
    import scipy.linalg._decomp_svd
    import scipy.linalg.lapack

    fake = _FailingLapack(info)
    a = np.ones((6, 2), dtype=complex)
    e, b = Rational(np.array([1j, 2j]), np.ones(2, complex), np.ones(2, complex), np.zeros(1))._pencil(np.ones(2, complex))
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(copy, "_gesdd", lambda rows, columns: (fake, 4))
        patch.setattr(scipy.linalg._decomp_svd, "get_lapack_funcs", lambda *args, **kwargs: (fake, None))
        patch.setattr(scipy.linalg._decomp_svd, "_compute_lwork", lambda *args, **kwargs: 4)
        patch.setattr(scipy.linalg.lapack, "get_lapack_funcs", lambda *args, **kwargs: (fake,))
        patch.setattr(scipy.linalg._decomp, "get_lapack_funcs", lambda *args, **kwargs: (fake,))
        expected = np.linalg.LinAlgError if info > 0 else ValueError
        theirs = _message(lambda: scipy.linalg.svd(a, full_matrices=False, check_finite=False))
        assert _message(lambda: copy._svd(a)) == theirs and theirs[0] is expected
        if info != -4:  # -4 is gesdd's own report
            theirs = _message(lambda: scipy.linalg.eigvals(e, b))
            assert _message(lambda: copy._finite_eigenvalues(e, b)) == theirs and theirs[0] is expected and "(ggev)" in theirs[1]


def test_once_a_step_is_ill_conditioned_every_later_step_normalises_as_scipys_do():
    """On a one-pole function with relative noise of 5e-16 (seed 1710) the Loewner matrices' condition hovers at scipy's
    limit: a later step's own ratio falls back below it after an earlier step passed it, and scipy still normalises
    that step's columns (its flag is never reset); the copy equals scipy there."""
    rng = np.random.default_rng(1710)
    z = 1j * np.linspace(-1.0, 1.0, 48)
    y = (2 / (z - 1.5) + 1) * (1 + 5e-16 * (rng.standard_normal(48) + 1j * rng.standard_normal(48)))
    steps = []
    weights = copy._weights
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(copy, "_weights", lambda a, ill: steps.append((ill, a.copy())) or weights(a, ill))
        _assert_scipys(z, y, 1e-15, 12)
    ratios = [(ill, np.divide(*np.linalg.svd(a, compute_uv=False)[[0, -1]])) for ill, a in steps]
    assert any(ill and ratio < copy._ILL_CONDITIONED for ill, ratio in ratios)


def test_residues_at_a_pole_on_a_support_point_are_scipys_without_a_warning():
    """Given poles that lie on support points (1/0 in scipy's residue formula, then inf/inf), residues() gives scipy's
    numbers for the same poles, inf and NaN included, and, as scipy's errstate has it, no divide or invalid warning."""
    z, y, rtol, terms = _fits_made_by(_sweep(), _loops()["two poles"])[0]
    ours, theirs = _ours(z, y, rtol, terms)[0], _scipy(z, y, rtol, terms)[0]  # fresh: residues are kept once computed
    poles = np.concatenate([ours.support_points[:2], ours.poles()])
    ours._poles = poles
    theirs.poles = lambda: poles
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        mine = ours.residues()
    with warnings.catch_warnings(record=True):
        warnings.simplefilter("always")
        reference = theirs.residues()
    assert _bits(mine) == _bits(reference) and not np.all(np.isfinite(mine))
