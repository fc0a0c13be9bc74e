"""The samples CSV: numpy.loadtxt reads back exactly the data, with magnitude and continuous phase."""

from __future__ import annotations

import numpy as np
from report_loops import FREQ_HZ, two_stage

from netloop.report import SAMPLE_COLUMNS, write_csv


def test_csv_round_trips_the_samples(tmp_path, stable_result):
    """freq_hz, re and im read back bit for bit, and the header names the five documented columns."""
    path = write_csv(stable_result, tmp_path / "t.csv")
    assert path.read_text().splitlines()[0] == ",".join(SAMPLE_COLUMNS)
    data = np.loadtxt(path, delimiter=",", skiprows=1)
    assert data.shape == (FREQ_HZ.size, 5)
    assert np.array_equal(data[:, 0], stable_result.analysis.freq_hz)
    assert np.array_equal(data[:, 1] + 1j * data[:, 2], stable_result.analysis.t)


def test_csv_magnitude_and_phase_match_the_closed_form(tmp_path, stable_result):
    """mag_db and phase_deg equal the closed form of the three-pole loop, the phase continuing past -180 deg to -270."""
    data = np.loadtxt(write_csv(stable_result, tmp_path / "t.csv"), delimiter=",", skiprows=1)
    f = data[:, 0]
    # closed form of A0 / ((1 + s/p1)(1 + s/p2)(1 + s/p3)): each real pole adds -atan(f/fp)
    phase = -np.degrees(np.arctan(f / 1e3) + np.arctan(f / 3e7) + np.arctan(f / 1e8))
    mag_db = 20 * np.log10(1e4) - 10 * (np.log10(1 + (f / 1e3) ** 2) + np.log10(1 + (f / 3e7) ** 2) + np.log10(1 + (f / 1e8) ** 2))
    assert np.allclose(data[:, 4], phase, atol=1e-9)
    assert np.allclose(data[:, 3], mag_db, atol=1e-9)
    assert data[-1, 4] < -260  # continuous branch, not wrapped to +90
    assert np.allclose(two_stage(f), data[:, 1] + 1j * data[:, 2])
