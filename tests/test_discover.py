"""measure_all_loops: every loop group broken at its best node and measured, with notes on the choice and on loops left closed."""

from __future__ import annotations

import numpy as np
import pytest

from netloop.discover import discover_loops, measure_all_loops, opened_circuit_rhp_poles
from netloop.errors import ProbeError

# A stable loop a<->b (negative feedback, gain 2 per stage) and a loop c<->d that is unstable on its own
# (positive feedback, loop gain 4), joined by a->c and d->b; every node has 1k || 1n to ground (tau = 1 us).
FIGURE_EIGHT = """figure eight of transconductance stages (invented)
Rla a 0 1k
Cla a 0 1n
Rlb b 0 1k
Clb b 0 1n
Rlc c 0 1k
Clc c 0 1n
Rld d 0 1k
Cld d 0 1n
Gab 0 b a 0 2m
Gba a 0 b 0 2m
Gcd 0 d c 0 2m
Gdc 0 c d 0 2m
Gac 0 c a 0 1m
Gdb 0 b d 0 1m
.end
"""
TAU_S = 1e3 * 1e-9


def _figure_eight_state_matrix() -> np.ndarray:
    """tau dv/dt = -v + A v for v = (a, b, c, d): gm R = 2 on the loop stages, 1 on the cross stages."""
    a = np.zeros((4, 4))
    a[1, 0], a[0, 1] = 2.0, -2.0  # a -> b, b -> a (inverting)
    a[3, 2], a[2, 3] = 2.0, 2.0  # c -> d, d -> c
    a[2, 0], a[1, 3] = 1.0, 1.0  # a -> c, d -> b
    return (a - np.eye(4)) / TAU_S


@pytest.mark.ngspice
def test_miller_buffer_is_measured_at_out(circuits):
    """Without --at the Miller buffer is broken at out, labelled "loop 1 (out)", with the margin of the header's hand probe."""
    results, notes = measure_all_loops(circuits / "miller_buffer.cir")
    (r,) = results
    assert (r.label, r.breaks.node) == ("loop 1 (out)", "out")
    # Reference: circuits/miller_buffer.cir header, hand probe in ngspice (0 V source at M1's gate): PM about 65 deg, crossover about 44 MHz.
    assert 60.0 < r.analysis.margins.phase_margin_deg < 70.0
    assert 40e6 < r.analysis.gain_crossovers[0].freq_hz < 50e6
    assert any("broken at out" in n and "opens them all" in n for n in notes)
    assert not any("closed" in w for w in r.warnings)


@pytest.mark.ngspice
def test_shared_bias_measures_both_buffers(circuits):
    """Two buffers on a shared bias line give two results, at outa and outb, with the two phase margins of the header."""
    results, notes = measure_all_loops(circuits / "testbench" / "shared_bias.cir")
    assert [r.label for r in results] == ["loop 1 (outa)", "loop 2 (outb)"]
    # Reference: circuits/testbench/shared_bias.cir header, hand probe: loop a PM about 65 deg, loop b about 46 deg.
    pm = [r.analysis.margins.phase_margin_deg for r in results]
    assert abs(pm[0] - 65.0) < 5.0 and abs(pm[1] - 46.0) < 5.0
    assert len([n for n in notes if "broken at" in n]) == 2


@pytest.mark.ngspice
def test_break_leaving_an_unstable_loop_closed_warns_and_finds_its_pole(tmp_path):
    """When the chosen break leaves a loop closed that is unstable on its own, the result says which and counts the RHP pole of T."""
    path = tmp_path / "eight.cir"
    path.write_text(FIGURE_EIGHT)
    (r,), notes = measure_all_loops(path)
    assert r.breaks.node == "a"
    assert any("leaves 1 of its loops closed" in w and "c -gcd(cp>n)-> d -gdc(cp>n)-> c" in w for w in r.warnings)
    # Reference: closed form. With a opened, the loop c<->d alone has 1 - 4/(1 + s tau)^2 = 0, i.e. s tau = 1 or -3:
    # exactly one right-half-plane pole of the opened circuit, so of T.
    assert opened_circuit_rhp_poles(r) == 1
    assert any("has 1 right-half-plane pole" in n for n in notes)
    # With P = 1 the Nyquist count gives the closed-loop RHP poles of the whole circuit.
    # Reference: numpy eigenvalues of the circuit's state matrix (written by hand from the netlist).
    want = int(np.sum(np.linalg.eigvals(_figure_eight_state_matrix()).real > 0))
    (r1,), _ = measure_all_loops(path, open_loop_rhp_poles=1)
    assert r1.analysis.nyquist.closed_loop_rhp_poles == want


def test_no_loop_is_an_error_before_any_simulation(tmp_path):
    """A netlist without a loop raises ProbeError saying so (no simulator is started)."""
    # Reference: by construction, a one-way chain a -> b has no loop.
    path = tmp_path / "chain.cir"
    path.write_text("chain (invented)\nV1 in 0 dc 0 ac 1\nG1 0 a in 0 1m\nR1 a 0 1k\nG2 0 b a 0 1m\nR2 b 0 1k\n.end\n")
    with pytest.raises(ProbeError, match="no feedback loop"):
        measure_all_loops(path)
    assert discover_loops(path).groups == ()


def test_driver_without_at_is_refused_for_several_groups(circuits):
    """--driver names one break's driver, so with two loop groups and no --at it is refused before any simulation."""
    # Reference: circuits/testbench/shared_bias.cir has two independent loops (its header).
    with pytest.raises(ProbeError, match="2 loop groups"):
        measure_all_loops(circuits / "testbench" / "shared_bias.cir", driver="m6a")
