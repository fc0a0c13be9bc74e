"""The level closed-loop peaking is measured from."""

from __future__ import annotations

import math

import numpy as np
import pytest

from netloop.analysis.closed_loop import in_band_db


@pytest.mark.parametrize(
    "t0, level",
    [
        (100.0, 20 * math.log10(100 / 101)),  # regulated: |T/(1+T)| at the bottom of the sweep
        (2.0 - 1.0j, 20 * math.log10(abs((2 - 1j) / (3 - 1j)))),
        (1.5, 20 * math.log10(1.5 / 2.5)),  # above 1, below 2
        (1.0, 0.0),  # |T| = 1 exactly is not above 1: the ideal in-band value 1, 0 dB
        (-1.0 + 0.0j, 0.0),
        (0.5, 0.0),  # does not regulate at the bottom
    ],
)
def test_in_band_level(t0, level):
    """20 log10 |T/(1+T)| at the lowest frequency when |T| > 1 there, else 0 dB (Peaking.reference_db in results.py)."""
    assert in_band_db(t0) == pytest.approx(level, abs=1e-12)



@pytest.mark.parametrize("k", [2.0, 4.0, 6.0])
def test_extrema_are_located_to_full_precision(k):
    """On T = k/(1 + s)^3 sampled 200 points a decade, the modulus margin min |1 + T| and the closed-loop peak max |T/(1 + T)|
    sit where scipy's bounded minimiser puts them on the closed form itself (to 1e-7 in frequency): the polish between grid
    points goes to the end, not to a default tolerance."""
    import numpy as np
    from scipy.optimize import minimize_scalar

    from netloop.analysis import analyse

    def closed_form(f_hz):
        return k / (1 + 2j * math.pi * f_hz) ** 3

    f = np.logspace(-3, 3, 1201)
    a = analyse(f, closed_form(f), fit_poles=False)
    modulus = minimize_scalar(lambda x: abs(1 + closed_form(10**x)), bounds=(-2, 1), method="bounded",
                              options={"xatol": 1e-14})
    peak = minimize_scalar(lambda x: -abs(closed_form(10**x) / (1 + closed_form(10**x))), bounds=(-2, 1), method="bounded",
                           options={"xatol": 1e-14})
    assert a.margins.modulus_freq_hz == pytest.approx(10**modulus.x, rel=1e-7)
    assert a.margins.modulus_margin == pytest.approx(modulus.fun, rel=1e-9)
    assert a.peaking.peak_freq_hz == pytest.approx(10**peak.x, rel=1e-7)
    assert a.peaking.absolute_peak_db == pytest.approx(20 * math.log10(-peak.fun), abs=1e-9)


def test_an_overflowing_interpolant_does_not_hide_the_peak():
    """Where |T| between samples exceeds the largest float (samples up to 1e308, a gain of 1e300 in a netlist), T/(1+T) is
    inf/inf there; those points are passed over without a warning, and the closed-loop peak is still at least the largest
    |T/(1+T)| of the samples and of the gain crossover, 1/(2 sin(PM/2)) (both by definition of a maximum over the sweep)."""
    import warnings

    import numpy as np

    from netloop.analysis import analyse

    f = np.logspace(0, 4, 41)
    gain_db = np.interp(np.log10(f), [0, 0.4, 0.6, 4], [6000, 6160, 6160, -200])  # 6160 dB is |T| = 1e308
    t = 10 ** (gain_db / 20) * np.exp(-1j * np.radians(np.linspace(10, 170, f.size)))
    assert np.all(np.isfinite(t))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        a = analyse(f, t, fit_poles=False)
    samples_db = 20 * np.log10(np.max(np.abs(t / (1 + t))))
    (crossing,) = a.gain_crossovers
    assert a.peaking.absolute_peak_db >= max(samples_db, crossing.peaking_db) - 1e-9
    assert math.isfinite(a.peaking.absolute_peak_db)


def test_a_loop_without_peaking_reads_its_level_at_the_bottom():
    """T = 10/(1 + s/w1): |T/(1+T)| = 10/|11 + s/w1| falls from the bottom of the sweep (closed form), stays below 1 and
    peaks nowhere: the peak is its value at the lowest frequency, which is also the reference, so peaking is 0 dB."""
    import numpy as np

    from netloop.analysis import analyse

    f = np.logspace(-2, 4, 121)
    w1 = 2 * math.pi * 10.0
    a = analyse(f, 10.0 / (1 + 2j * math.pi * f / w1), fit_poles=False)
    level = 20 * math.log10(abs(10.0 / (11.0 + 2j * math.pi * f[0] / w1)))  # closed form at the lowest frequency, < 0 dB
    assert level < 0.0
    assert a.peaking.reference_db == pytest.approx(level, abs=1e-12)
    assert a.peaking.absolute_peak_db == pytest.approx(level, abs=1e-9)
    assert a.peaking.peak_db == pytest.approx(0.0, abs=1e-9) and a.peaking.peak_freq_hz == pytest.approx(f[0], rel=1e-3)


def test_a_minimum_at_the_top_of_the_sweep_is_read_there():
    """T = 4/(1 + s)^3 swept up to 0.2 Hz ends before the loop comes closest to -1 (near w = sqrt 3, where T is real), so
    over the sweep |1 + T| is smallest and |T/(1 + T)| largest at the top: both extrema are the closed form's values at
    0.2 Hz (a minimum over an interval at its end)."""
    import numpy as np

    from netloop.analysis import analyse

    def closed_form(f_hz):
        return 4 / (1 + 2j * math.pi * f_hz) ** 3

    f = np.logspace(-3, math.log10(0.2), 61)
    a = analyse(f, closed_form(f), fit_poles=False)
    top = closed_form(0.2)
    assert a.margins.modulus_freq_hz == pytest.approx(0.2, rel=1e-12)
    assert a.margins.modulus_margin == pytest.approx(abs(1 + top), rel=1e-9)
    assert a.peaking.peak_freq_hz == pytest.approx(0.2, rel=1e-12)
    assert a.peaking.absolute_peak_db == pytest.approx(20 * math.log10(abs(top / (1 + top))), abs=1e-9)


def test_zoom_grid_is_numpy_linspace_bit_for_bit():
    """The polish's grid is np.linspace(lo, hi, 65) to the last bit, on brackets of every width the polish narrows through."""
    from netloop.analysis.closed_loop import _ZOOM_POINTS, _zoom_grid

    rng = np.random.default_rng(17)
    for _ in range(2000):
        lo = np.float64(rng.uniform(-6.0, 13.0))
        hi = lo + np.float64(10.0 ** rng.uniform(-10.5, 0.5))
        assert np.array_equal(_zoom_grid(lo, hi), np.linspace(lo, hi, _ZOOM_POINTS))
