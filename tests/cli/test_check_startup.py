"""`netloop check` starts ngspice first and leaves the report stage to load while ngspice reads the netlist."""

from __future__ import annotations

import sys

import pytest

from netloop.cli.main import main

pytestmark = pytest.mark.ngspice


def test_the_first_job_goes_to_a_worker_started_ahead_before_the_report_stage_loads(circuits, monkeypatch, capsys):
    """When check sends its first job, the worker process it goes to was started ahead (netloop.sim.spawn) and the
    report stage is not imported yet; the summary is printed all the same."""
    import netloop.sim.shared as shared  # noqa: PLC0415
    import netloop.sim.spawn as spawn  # noqa: PLC0415

    seen: list[tuple[bool, bool]] = []
    started_ahead: list[int] = []
    real_take, real_call = spawn.take, shared._Worker.call

    def take(library_path):
        taken = real_take(library_path)
        started_ahead.append(taken.process.pid if taken else 0)
        return taken

    def call(self, request, timeout_s):
        if request[0] == "run" and not seen:
            seen.append(("netloop.report" in sys.modules, self.process.pid == started_ahead[0]))
        return real_call(self, request, timeout_s)

    monkeypatch.setattr(shared, "take", take)
    monkeypatch.setattr(shared._Worker, "call", call)
    for name in [m for m in sys.modules if m == "netloop.report" or m.startswith("netloop.report.")]:
        monkeypatch.delitem(sys.modules, name)
    assert main(["check", str(circuits / "miller_buffer.cir"), "--at", "out"]) == 0
    assert seen == [(False, True)]
    assert capsys.readouterr().out.startswith("PASS")
