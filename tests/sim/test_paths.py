"""Relative .include/.lib paths resolve from the job's workdir (or the current folder), in both backends."""

from __future__ import annotations

import numpy as np
import pytest

from netloop.errors import SimulationError
from netloop.sim import AcRun, AcSweep, SimJob

NETLIST = """divider through an include
.include parts/divider.inc
v1 in 0 dc 3 ac 1
xdiv in out half
"""
INCLUDE = """.subckt half top mid
r1 top mid 2k
r2 mid 0 2k
.ends
"""


def _job(workdir=None) -> SimJob:
    sweep = (AcSweep("lin", 3, 1.0, 3.0),)
    return SimJob(NETLIST, runs=(AcRun("a", {"v1": 1.0}, sweep),), save=("v(out)",), excitable=("v1",), workdir=workdir)


def _write_parts(folder):
    (folder / "parts").mkdir()
    (folder / "parts" / "divider.inc").write_text(INCLUDE)


@pytest.mark.ngspice
def test_include_resolves_from_workdir(simulator, tmp_path):
    """With workdir set, '.include parts/divider.inc' is read from there; the divider gives half."""
    _write_parts(tmp_path)
    result = simulator.run(_job(str(tmp_path)))
    assert result.operating_point["out"] == pytest.approx(1.5, rel=1e-12)  # 3 V * 2k/(2k+2k), closed form
    np.testing.assert_allclose(result.run("a").vectors["v(out)"], 0.5, rtol=1e-12)


@pytest.mark.ngspice
def test_include_resolves_from_the_current_folder(simulator, tmp_path, monkeypatch):
    """Without workdir, relative paths are read from the caller's current folder, as ngspice would."""
    _write_parts(tmp_path)
    monkeypatch.chdir(tmp_path)
    assert simulator.run(_job()).operating_point["out"] == pytest.approx(1.5, rel=1e-12)  # closed form


@pytest.mark.ngspice
def test_missing_include_is_reported_and_the_next_job_runs(simulator, tmp_path):
    """A missing include raises SimulationError naming the file; ngspice (which may be left unusable
    by it) still runs the next job."""
    with pytest.raises(SimulationError, match="divider.inc"):
        simulator.run(_job(str(tmp_path)))
    _write_parts(tmp_path)
    assert simulator.run(_job(str(tmp_path))).operating_point["out"] == pytest.approx(1.5, rel=1e-12)


def test_workdir_must_exist(tmp_path):
    """A workdir that is not a folder is refused, naming it, before ngspice is started."""
    from netloop.sim import BatchSimulator  # noqa: PLC0415

    with pytest.raises(SimulationError, match="nowhere"):
        BatchSimulator(binary="/nonexistent/ngspice").run(_job(str(tmp_path / "nowhere")))
