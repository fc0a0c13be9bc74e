"""The sampled return ratio as a CSV file: one row per frequency, plain numbers that numpy.loadtxt reads back.

Columns (header line first, comma-separated, no quoting):

    freq_hz     frequency in Hz, ascending
    re, im      real and imaginary parts of T
    mag_db      20 log10 |T| (a sample with T exactly 0 is written as -6000, as the analysis reads it)
    phase_deg   angle of T on the continuous branch, the first sample in (-180, 180]

Read it back with ``numpy.loadtxt(path, delimiter=",", skiprows=1)``. Numbers are written with 17
significant digits, so the data round-trips exactly.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from netloop.analysis.response import anchored_phase_deg
from netloop.jobs.loop_result import LoopResult
from netloop.report.files import output_file

__all__ = ["SAMPLE_COLUMNS", "sample_table", "write_csv"]

SAMPLE_COLUMNS = ("freq_hz", "re", "im", "mag_db", "phase_deg")
_ZERO_DB = -6000.0


def sample_table(result: LoopResult) -> np.ndarray:
    """The samples as an (n, 5) float array in the order of SAMPLE_COLUMNS."""
    f = np.asarray(result.analysis.freq_hz, dtype=float)
    t = np.asarray(result.analysis.t, dtype=complex)
    mag = np.abs(t)
    mag_db = np.full(mag.shape, _ZERO_DB)
    np.log10(mag, out=mag_db, where=mag > 0)
    mag_db = np.where(mag > 0, 20.0 * mag_db, _ZERO_DB)
    return np.column_stack([f, t.real, t.imag, mag_db, anchored_phase_deg(t)])


def write_csv(result: LoopResult, path: str | Path) -> Path:
    """Write the sampled return ratio of one loop to `path` (see the module docstring); returns the path."""
    table = sample_table(result)
    with output_file(path, "CSV samples") as out:
        np.savetxt(out, table, fmt="%.17g", delimiter=",", header=",".join(SAMPLE_COLUMNS), comments="")
    return out
