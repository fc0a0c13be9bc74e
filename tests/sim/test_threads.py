"""Every ngspice netloop starts runs on one OpenMP thread, so parallel workers do not spin against each other."""

from __future__ import annotations

import subprocess
import sys

import pytest
from sim_decks import same_netloop

from netloop.sim import AcRun, AcSweep, SimJob
from netloop.sim.deck import control_steps
from netloop.sim.library import NGSPICE_THREADS


def test_batch_deck_sets_one_thread_first():
    """The batch deck's control block sets num_threads before any analysis (ngspice manual, 'num_threads' variable)."""
    job = SimJob(netlist="rc\nr1 a 0 1k\n", runs=(AcRun("r", {}, (AcSweep("dec", 2, 1.0, 100.0),)),), save=("v(a)",))
    steps = control_steps(job, write_raw=True)
    assert steps[0].command == f"set num_threads={NGSPICE_THREADS}" and NGSPICE_THREADS == 1


@pytest.mark.ngspice
def test_shared_session_runs_on_one_thread():
    """The shared-library session reports num_threads = 1 when asked by ngspice's own echo command."""
    # in a fresh interpreter: PySpice declares its C types once per process, and other tests load it too
    code = (
        "from netloop.sim.session import NgspiceSession; from netloop.sim import find_libngspice; "
        "print(' '.join(NgspiceSession(find_libngspice()).command('echo $num_threads')))"
    )
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60, check=True, env=same_netloop())
    assert run.stdout.split()[-1] == "1", run.stdout
