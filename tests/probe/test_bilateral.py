"""A loop with a reverse path across the break: the probe's 1 + T has the closed circuit's poles as zeros; a naive break does not."""

from __future__ import annotations

import re
import shutil
import subprocess

import numpy as np
import pytest
from scipy.interpolate import AAA

from netloop.analysis.return_ratio import tian
from netloop.netlist import parse_text
from netloop.probe import break_loop
from netloop.sim import AcRun, AcSweep, SimJob

from .conftest import probe_runs

# Invented behavioural loop. Cbr bridges the load side (inn) and the driver's own input (n2):
# a bilateral reverse path around the break at out, and Rf1 loads the driver.
BILATERAL = """bilateral loop with a reverse path
E1 n1 0 0 inn 100
R1 n1 n2 1k
C1 n2 0 1n
G1 0 out n2 0 1m
Ro out 0 10k
CL out 0 10p
Rf1 out inn 10k
Rf2 inn 0 10k
Cin inn 0 1p
Cbr inn n2 2p
"""

# The naive break (common practice): a huge inductor passes DC and blocks AC, a huge capacitor
# injects the test signal into the load side; T_naive = -v(a)/v(b).
NAIVE = """naive break of the same loop
E1 n1 0 0 inn 100
R1 n1 n2 1k
C1 n2 0 1n
G1 0 outa n2 0 1m
Ro outa 0 10k
CL outa 0 10p
Lbig outa out 1e9
Vinj inj 0 dc 0 ac 1
Cinj inj out 1e9
Rf1 out inn 10k
Rf2 inn 0 10k
Cin inn 0 1p
Cbr inn n2 2p
"""

_POLE = re.compile(r"pole\(\d+\)\s*=\s*([-+0-9.eE]+)\s*,\s*([-+0-9.eE]+)")


def ngspice_poles(text: str, tmp_path) -> np.ndarray:
    """Poles (rad/s) of the closed circuit from ngspice's own pole-zero analysis (current input: the circuit is not altered)."""
    deck = tmp_path / "pz.cir"
    deck.write_text(text + ".control\nset numdgt=12\npz inn 0 out 0 cur pol\nprint all\n.endc\n.end\n")
    out = subprocess.run([shutil.which("ngspice"), "-b", str(deck)], capture_output=True, text=True, timeout=60, cwd=tmp_path)
    poles = np.array([complex(float(m.group(1)), float(m.group(2))) for m in _POLE.finditer(out.stdout)])
    assert len(poles) > 0, out.stdout + out.stderr
    return poles


def zeros_of_one_plus_t(freq_hz, t) -> np.ndarray:
    """Poles of 1/(1 + T) fitted on the jw axis by scipy's AAA rational approximation (scipy.interpolate.AAA)."""
    z = 2j * np.pi * freq_hz
    fit = AAA(z, 1.0 / (1.0 + t), rtol=1e-11)
    return fit.poles()


def _nearest_rel(targets, found):
    return np.array([np.min(np.abs(found - p)) / abs(p) for p in targets])


@pytest.mark.ngspice
def test_probe_zeros_match_pz_and_naive_break_does_not(simulator, tmp_path):
    """The zeros of 1 + T from the probe equal ngspice's .pz poles of the closed circuit; the naive L/C break misses them."""
    poles = ngspice_poles(BILATERAL, tmp_path)  # ngspice's own pole-zero analysis
    p = break_loop(parse_text(BILATERAL), "out", driver="g1,ro,cl")
    freq, q, _ = probe_runs(simulator, p, 1e3, 1e10, 20)
    t = tian(q.va1, q.vb1, q.ib2)
    assert np.max(_nearest_rel(poles, zeros_of_one_plus_t(freq, t))) < 1e-6

    sweeps = (AcSweep("dec", 20, 1e3, 1e10),)
    naive = simulator.run(SimJob(NAIVE, (AcRun("inj", {"vinj": 1.0}, sweeps),), ("v(outa)", "v(out)"), excitable=("vinj",)))
    run = naive.run("inj")
    t_naive = -run.vectors["v(outa)"] / run.vectors["v(out)"]
    assert np.array_equal(run.freq_hz, freq)
    assert np.max(np.abs(t_naive - t) / np.abs(t)) > 0.1  # a different answer ...
    assert np.max(_nearest_rel(poles, zeros_of_one_plus_t(freq, t_naive))) > 1e-2  # ... and a wrong one
