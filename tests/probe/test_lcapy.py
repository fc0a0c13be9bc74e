"""The probe's T on a small linear loop equals Bode's return ratio solved symbolically by lcapy."""

from __future__ import annotations

import numpy as np
import pytest
import sympy

from netloop.analysis.return_ratio import middlebrook, tian
from netloop.netlist import parse_text
from netloop.probe import break_loop

from .conftest import probe_runs
from .test_bilateral import BILATERAL

# The same loop with G1's controlling voltage replaced by an independent unit: G1 becomes a current
# source of gm = 1 mA into out (lcapy's "I out 0" pushes current into out). Every other element,
# including the reverse path Cbr, stays as it is, so the node out keeps its full load.
LCAPY_CUT = """
E1 n1 0 0 inn 100
R1 n1 n2 1000
C1 n2 0 1e-9
I1 out 0 s 1/1000
Ro out 0 10000
CL out 0 1e-11
Rf1 out inn 10000
Rf2 inn 0 10000
Cin inn 0 1e-12
Cbr inn n2 2e-12
"""


def lcapy_return_ratio(freq_hz):
    """Bode's return ratio for G1, T = -v(n2)/v_x with the dependency cut, solved symbolically by lcapy 1.26."""
    import lcapy  # noqa: PLC0415

    v_n2 = lcapy.Circuit(LCAPY_CUT).n2.V(lcapy.s).sympy
    (s,) = v_n2.free_symbols
    f = sympy.lambdify(s, -v_n2, "numpy")
    return np.asarray(f(2j * np.pi * np.asarray(freq_hz)), dtype=complex)


@pytest.mark.ngspice
def test_probe_equals_lcapy_return_ratio(simulator):
    """With G1 the only element driving out, the node-break T (Tian and Middlebrook) equals lcapy's return ratio of G1 within 1e-9."""
    p = break_loop(parse_text(BILATERAL), "out")
    assert p.driver_terminals == ("g1.n",)
    freq, q, _ = probe_runs(simulator, p, 1.0, 1e8, 10)
    ref = lcapy_return_ratio(freq)  # lcapy symbolic solve
    for t in (tian(q.va1, q.vb1, q.ib2), middlebrook(q.va1, q.vb1, q.ia2, q.ib2)):
        assert np.max(np.abs(t - ref) / np.abs(ref)) < 1e-9
