"""scipy's AAA rational fit, copied for speed: the same support points, values, weights, errors and poles, bit for bit.

The algorithm is scipy.interpolate.AAA's (scipy 1.17.1, scipy/interpolate/_bary_rational.py), which is that of
Nakatsukasa, Sete and Trefethen, "The AAA algorithm for rational approximation", SIAM J. Sci. Comput. 40 (2018),
A1494-A1522. netloop.analysis.poles fits 1/(1+T) once or twice a measurement, and a statistical run measures hundreds
of samples, so the fit's cost counts: scipy spends most of it on the handling of many small calls rather than on
arithmetic. Each of its steps calls scipy.linalg.svd, whose wrappers (batch dispatch, argument checks, the LAPACK
routine's look-up and work size) cost about as much as the LAPACK gesdd call itself, and computes the unused points'
residuals and the Cauchy matrix's columns more than once; poles() and roots() go through scipy.linalg.eigvals' wrappers
to LAPACK's ggev. This copy does the same arithmetic in fewer calls:

- the same LAPACK routines (scipy's own, from scipy.linalg.lapack), called directly with the arguments scipy's wrappers
  give them: gesdd with scipy's work size for the shape and reduced U and V, as scipy.linalg.svd(a,
  full_matrices=False, check_finite=False) calls it; ggev after its own work-size query, without eigenvectors, as
  scipy.linalg.eigvals(E, B) calls it; and the errors those wrappers raise;
- the residual |f - r| of each step computed once (scipy computes it at every point for the error, then again at the
  unused points to choose the next support point: the same numbers), and the Cauchy matrix's columns of nonzero
  weight taken once for numerator and denominator (scipy takes them twice);
- scipy's numpy expressions, in its order and memory layout, everywhere else, so numpy warns where scipy's AAA warns,
  and the not-converged warning is scipy's.

Out of the usual path the fit is scipy's own: inputs other than 1-D complex128 data with finite points and at least one
term (scipy's AAA fits them or refuses them with its error), and fewer than two points a term, where a step can have
fewer unused points than terms (scipy's null-space branch: scipy's AAA fits the whole). netloop.analysis.poles refits
with scipy's AAA where a Froissart doublet may need its clean-up. The ill-conditioned step (scipy normalises the
columns before the SVD) is copied. tests/analysis/test_aaa.py holds every output and warning to scipy's bit for bit,
through each branch, on closed-form loops, noisy data, measured data, scipy's spiral and degenerate data.

Measured on 20 fits captured from a yield run of the sky130 Miller buffer (278 points, nine steps each):
time.process_time over the 20, five times, median of 15 alternating runs, on the 2-core development machine: scipy's
AAA 1.20 ms a fit, this copy 0.75 ms (of which gesdd itself about 0.3); with poles(), residues() and roots() 1.52 ms
against 0.99. In place (the corner worker's run_task on 77 of its samples, each function timed by wrapping it, three
runs of each alternating): the fit 1.7-2.0 ms a sample before, 1.2-1.3 after; closed_loop_poles 2.2-2.6 before,
1.7-1.8 after.
"""

from __future__ import annotations

import functools
import math
import warnings

import numpy as np

from netloop.analysis.preload import load_scipy

__all__ = ["Rational", "aaa"]

# scipy's test of an ill-conditioned step (in its _compute_weights: 1 / (3 eps) of the data's dtype), named here so that
# a test can switch the branch off and see the copy part from scipy
_ILL_CONDITIONED = 1 / (3 * np.finfo(np.complex128).eps)


class Rational:
    """A rational function in barycentric form as scipy's AAA object holds it: ``support_points``, ``support_values``,
    ``weights``, ``errors``, and ``poles()``, ``residues()`` and ``roots()``, each computed on first use as scipy's."""

    __slots__ = ("_poles", "_residues", "_roots", "errors", "support_points", "support_values", "weights")

    def __init__(self, support_points: np.ndarray, support_values: np.ndarray, weights: np.ndarray, errors: np.ndarray):
        self.support_points, self.support_values, self.weights, self.errors = support_points, support_values, weights, errors
        self._poles = self._residues = self._roots = None

    def poles(self) -> np.ndarray:
        """scipy's _BarycentricRational.poles: the finite eigenvalues of the pencil (E, B) with the weights on top."""
        if self._poles is None:
            self._poles = _finite_eigenvalues(*self._pencil(self.weights))
        return self._poles

    def residues(self) -> np.ndarray:
        """scipy's _BarycentricRational.residues, by its expressions."""
        if self._residues is None:
            with np.errstate(divide="ignore", invalid="ignore"):
                n = (1 / (np.subtract.outer(self.poles(), self.support_points))) @ (self.support_values * self.weights)
                d_diff = -((1 / np.subtract.outer(self.poles(), self.support_points)) ** 2) @ self.weights
                self._residues = n / d_diff
        return self._residues

    def roots(self) -> np.ndarray:
        """scipy's _BarycentricRational.roots: the same pencil with the weights times the values on top."""
        if self._roots is None:
            self._roots = _finite_eigenvalues(*self._pencil(self.weights * self.support_values))
        return self._roots

    def _pencil(self, top: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """scipy's arrowhead pencil (E, B): ``top`` on E's first row, the support points on its diagonal."""
        m = self.weights.size
        b = np.eye(m + 1, dtype=self.weights.dtype)
        b[0, 0] = 0
        e = np.zeros_like(b, dtype=np.result_type(top, self.support_points))
        e[0, 1:] = top
        e[1:, 0] = 1
        np.fill_diagonal(e[1:, 1:], self.support_points)
        return e, b


def aaa(x: np.ndarray, y: np.ndarray, rtol: float | None, max_terms: int):
    """scipy.interpolate.AAA(x, y, rtol=rtol, max_terms=max_terms, clean_up=False) bit for bit, its warnings included:
    a Rational, or scipy's AAA itself where this copy does not go (module docstring)."""
    load_scipy()
    z, f = np.asarray(x), np.asarray(y)
    if rtol is None or not _usual(z, f, max_terms):
        return _scipys(x, y, rtol, max_terms)
    keep = np.isfinite(f)  # scipy keeps finite and not NaN values: the same for 1-D data
    z, unique = np.unique(z[keep], return_index=True)
    f = f[keep][unique]
    if z.size < 2 * max_terms:  # a step could have fewer unused points than terms: scipy's null-space branch
        return _scipys(x, y, rtol, max_terms)
    return Rational(*_iterate(z, f, rtol, max_terms))


def _usual(z: np.ndarray, f: np.ndarray, max_terms: int) -> bool:
    """Whether the copy takes these inputs: 1-D complex128 data, a value for each point, finite points, at least one
    term (and a tolerance: scipy's default, for None, is left to scipy). Others go to scipy, which refuses them with its
    own error or fits them."""
    return (z.ndim == 1 and f.ndim == 1 and z.size == f.size and isinstance(max_terms, int) and max_terms >= 1
            and np.result_type(z, f, 1.0) == np.complex128 and bool(np.all(np.isfinite(z))))


def _scipys(x, y, rtol: float, max_terms: int):
    """scipy's AAA itself, without its clean-up."""
    from scipy.interpolate import AAA  # noqa: PLC0415 - loaded by load_scipy

    return AAA(x, y, rtol=rtol, max_terms=max_terms, clean_up=False)


def _iterate(z: np.ndarray, f: np.ndarray, rtol: float, max_terms: int):
    """scipy's AAA._compute_weights for unique points ``z``, at least twice as many as ``max_terms`` (so every step has
    more unused points than terms): support points, values, weights and errors. Where an expression differs from
    scipy's, a comment says why the numbers cannot."""
    size = np.size(z)
    mask = np.ones(size, dtype=np.bool_)
    dtype = np.result_type(z, f, 1.0)
    atol = rtol * np.linalg.norm(f, ord=np.inf)
    zj = np.empty(max_terms, dtype=dtype)
    fj = np.empty(max_terms, dtype=dtype)
    cauchy = np.empty((size, max_terms), dtype=dtype)
    loewner = np.empty((size, max_terms), dtype=dtype)
    errors = np.empty(max_terms, dtype=loewner.real.dtype)
    r = np.repeat(np.mean(f), size)
    ill_conditioned = False
    # |f - r| at every point, once a step: scipy takes it at the unused points to choose the next support point, and at
    # every point for the error (its np.linalg.norm(f - r, ord=np.inf) is abs(f - r).max(initial=0))
    residual = np.abs(f - r)
    for m in range(max_terms):
        # the unused point of largest residual: used points set below every residual (>= 0 or NaN) keep the unused ones
        # in their order, so argmax, which returns the first largest (or the first NaN), picks scipy's point
        k = np.argmax(np.where(mask, residual, -1.0))
        zj[m] = z[k]
        fj[m] = f[k]
        with np.errstate(divide="ignore", invalid="ignore"):  # scipy's for each column: a product cannot divide by zero
            cauchy[:, m] = 1 / (z - z[k])
            loewner[:, m] = (f - fj[m]) * cauchy[:, m]
        mask[k] = False
        wj, ill_conditioned = _weights(loewner[mask, : m + 1], ill_conditioned)
        i0 = wj != 0
        # scipy takes the columns and weights of nonzero weight twice, for the numerator and the denominator
        columns, nonzero = cauchy[:, : m + 1][:, i0], wj[i0]
        with np.errstate(invalid="ignore"):
            n = columns @ (nonzero * fj[: m + 1][i0])
            d = columns @ nonzero
        d_inf = ~np.isfinite(d)  # scipy: np.isinf(d) | np.isnan(d), the same for complex numbers (either part)
        d[d_inf] = 1
        n[d_inf] = f[d_inf]
        r = n / d
        residual = np.abs(f - r)
        errors[m] = residual.max(initial=0)
        if errors[m] <= atol:
            break
    if m == max_terms - 1:
        warnings.warn(f"AAA failed to converge within {max_terms} iterations.", RuntimeWarning, stacklevel=3)
    i_non_zero = wj != 0
    return zj[: m + 1][i_non_zero], fj[: m + 1][i_non_zero], wj[i_non_zero], errors[: m + 1]


def _weights(a: np.ndarray, ill_conditioned: bool) -> tuple[np.ndarray, bool]:
    """The weights of a step from its Loewner matrix ``a`` (the unused points' rows), as scipy's tall-skinny case
    computes them, and whether this or an earlier step was ill-conditioned (scipy then normalises the columns)."""
    if not ill_conditioned:
        s, v = _svd(a)
        with np.errstate(invalid="ignore", divide="ignore"):
            if s[0] / s[-1] > _ILL_CONDITIONED:
                ill_conditioned = True
    if ill_conditioned:
        col_norm = np.linalg.norm(a, axis=0)
        s, v = _svd(a / col_norm)
    # scipy: mm = s == np.min(s); wj = (V.conj()[mm, :].sum(axis=0) / np.sqrt(mm.sum())).astype(dtype) (the vectors of
    # several smallest singular values summed, for weights none of which is 0). The same operations on the same numbers
    # in fewer calls (3 us of 8 saved, timeit): rows taken before their conjugates, the count's square root by math.sqrt
    # (IEEE's correctly rounded root of an exact integer, as numpy's), the result already of the data's dtype.
    mm = s == s.min()
    wj = v[mm].conj().sum(axis=0) / math.sqrt(np.count_nonzero(mm))
    if ill_conditioned:
        wj /= col_norm
    return wj, ill_conditioned


def _svd(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(s, Vh) of scipy.linalg.svd(a, full_matrices=False, check_finite=False), as scipy's AAA calls it: 34 us a call,
    of which the LAPACK call 30 (timeit, 273 x 6).

    The same numbers (scipy 1.17.1, scipy/linalg/_decomp_svd.py): scipy's argument check hands back ``a`` itself (so
    its overwrite_a is False), and it calls the gesdd get_lapack_funcs gives for a's dtype, with the work size of
    gesdd_lwork for its shape, U and V reduced; so LAPACK gets the same arguments. Its errors are scipy's."""
    gesdd, lwork = _gesdd(*a.shape)
    _, s, v, info = gesdd(a, compute_uv=True, lwork=lwork, full_matrices=False, overwrite_a=False)
    if info > 0:
        raise np.linalg.LinAlgError("SVD did not converge")
    if info == -4:
        raise ValueError("A has a NaN entry")
    if info < 0:
        raise ValueError(f"illegal value in {-info}th argument of internal gesdd")
    return s, v


@functools.lru_cache(maxsize=4096)
def _gesdd(rows: int, columns: int):
    """scipy.linalg.svd's LAPACK routine for complex128 matrices and its work size for this shape, reduced U and V
    (the size depends on the shape alone: one query a shape). scipy's build has no C LAPACK module, so the routine is
    flapack's whatever the memory order get_lapack_funcs sees."""
    from scipy.linalg.lapack import get_lapack_funcs  # noqa: PLC0415 - loaded by load_scipy

    gesdd, gesdd_lwork = get_lapack_funcs(("gesdd", "gesdd_lwork"), (np.empty((rows, columns), np.complex128),), ilp64="preferred")
    work, info = gesdd_lwork(rows, columns, compute_uv=True, full_matrices=False)
    if info != 0:
        raise ValueError(f"Internal work array size computation failed: {info}")
    return gesdd, int(work.real)  # scipy's _compute_lwork for double precision: the size LAPACK returns, as an integer


def _finite_eigenvalues(e: np.ndarray, b: np.ndarray) -> np.ndarray:
    """scipy.linalg.eigvals(e, b)[np.isfinite(...)] for complex128 pencils, as scipy's poles() and roots() take it:
    33 us instead of 55 on a nine-term fit (timeit), of which ggev itself 22.

    The same numbers, step by step (scipy 1.17.1, scipy/linalg/_decomp.py eig and _geneig): its input check
    (np.asarray_chkfinite, which hands back these very arrays, so scipy's overwrite flags are False); the LAPACK routine
    get_lapack_funcs gives for these arrays (zggev); the work size of its query with the default arguments; the call
    without eigenvectors (scipy's left=0, right=0) and its errors. LAPACK gets the same arguments, so it returns the same
    alpha and beta. scipy's _make_eigvals then gives alpha / beta where beta != 0 and inf or NaN where beta == 0, and
    its callers keep the finite values: those are alpha / beta where beta != 0 and it is finite, in the same order."""
    from scipy.linalg.lapack import get_lapack_funcs  # noqa: PLC0415 - loaded by load_scipy

    e, b = np.asarray_chkfinite(e), np.asarray_chkfinite(b)
    (ggev,) = get_lapack_funcs(("ggev",), (e, b))
    lwork = ggev(e, b, lwork=-1)[-2][0].real.astype(np.int_)
    alpha, beta, _, _, _, info = ggev(e, b, False, False, lwork, False, False)
    if info < 0:
        raise ValueError(f"illegal value in argument {-info} of internal generalized eig algorithm (ggev)")
    if info > 0:
        raise np.linalg.LinAlgError(f"generalized eig algorithm (ggev) did not converge (LAPACK info={info})")
    finite = beta != 0
    w = alpha[finite] / beta[finite]
    return w[np.isfinite(w)]
