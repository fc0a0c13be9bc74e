"""A loop opened by hand, run by ngspice itself: the reference the probe's T is checked against."""

from __future__ import annotations

import subprocess
from pathlib import Path

import numpy as np


def ngspice_vector(netlist: str, folder: Path, analysis: str, vector: str) -> tuple[np.ndarray, np.ndarray]:
    """(frequencies, complex values) of ``vector`` after ``analysis`` (e.g. "ac dec 10 1 1e9") of ``netlist`` (ending in
    .end), from ngspice -b and wrdata (9 significant digits)."""
    out = folder / "returned.txt"
    deck = folder / "opened.cir"
    deck.write_text(netlist.replace(".end\n", f".control\n{analysis}\nwrdata {out} {vector}\nquit\n.endc\n.end\n"))
    subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, check=True, timeout=120)
    f, re, im = np.loadtxt(out, unpack=True)
    return f, re + 1j * im
