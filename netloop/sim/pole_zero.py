"""ngspice's own pole analysis (``pz``) of a small circuit: the natural frequencies seen from one node."""

from __future__ import annotations

import os
import re
import subprocess
import tempfile
from pathlib import Path

import numpy as np

from netloop.sim.deck import strip_end
from netloop.sim.library import NGSPICE_THREADS, find_ngspice_binary

__all__ = ["node_poles"]

_POLE = re.compile(r"pole\(\s*\d+\)\s*=\s*([-+0-9.eE]+)\s*,\s*([-+0-9.eE]+)")


def node_poles(netlist: str, node: str, *, workdir: str | None = None, timeout_s: float = 30.0) -> np.ndarray | None:
    """The poles (rad/s) of the impedance at ``node`` (current in, voltage out), from ``ngspice -b`` with ``pz``.

    A current source changes no natural frequency, so these are the circuit's own poles (those the
    node sees). None when ngspice cannot do it (its pole search is iterative and fails on some
    circuits) or is not installed: a caller treats that as "no cross-check", never as a result.
    """
    binary = find_ngspice_binary()
    if binary is None:
        return None
    text = strip_end(netlist).rstrip("\n") + f"\n.control\nset numdgt=12\npz {node} 0 {node} 0 cur pol\nprint all\n.endc\n.end\n"
    with tempfile.TemporaryDirectory(prefix="netloop-pz-") as folder:
        deck = Path(folder) / "pz.cir"
        deck.write_text(text)
        try:
            run = subprocess.run([binary, "-b", str(deck)], capture_output=True, text=True, timeout=timeout_s, cwd=workdir or folder,
                                 env={**os.environ, "OMP_NUM_THREADS": str(NGSPICE_THREADS)})
        except (OSError, subprocess.TimeoutExpired):
            return None
    found = _POLE.findall(run.stdout)
    if not found:
        return None
    return np.array([complex(float(re_), float(im)) for re_, im in found])
