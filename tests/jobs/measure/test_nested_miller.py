"""A three-stage nested-Miller buffer broken at its output measures the loop gain ngspice gives the feedback wire opened by hand."""

from __future__ import annotations

import re
import subprocess
from pathlib import Path

import numpy as np
import pytest
from hand_opened import ngspice_vector

from netloop.jobs.measure import Sweep, measure

pytestmark = pytest.mark.ngspice

BENCH = Path(__file__).resolve().parents[3] / "circuits" / "testbench" / "nested_miller.cir"
FIXED = Sweep(fmin_hz=1.0, fmax_hz=1e10, points_per_decade=10, refine=False, fmin_given=True, fmax_given=True)


def _with_control(text: str, control: str) -> str:
    return text.replace(".end\n", f".control\n{control}\nquit\n.endc\n.end\n")


def test_the_output_break_of_a_nested_miller_buffer_is_the_feedback_wire_opened_by_hand(tmp_path):
    """Broken at out, T equals ngspice's AC of the buffer with the feedback wire cut (M1A's gate driven through 1 TF,
    its DC kept through 1 TH from out; the level-1 gate draws nothing, so that opening is exact): both Miller capacitors
    stay with the output stage. Before, Cm1 went to the load side: PM 22.7 deg at 16.3 MHz and GM 15.0 dB, against the
    hand-opened 52.5 deg at 9.29 MHz and 5.8 dB, and a closed-loop peaking of 8.1 dB where ngspice's closed loop peaks 3.3."""
    text = BENCH.read_text()
    result = measure(text, "out", sweep=FIXED)
    opened = text.replace("Vin inp 0 dc {vcm} ac 1\n", "Vin inp 0 dc {vcm}\nLop out fbin 1T\nCop fbin inj 1T\nVt inj 0 dc 0 ac 1\n")
    opened = opened.replace("M1A d1 out tail1", "M1A d1 fbin tail1")
    f, v_out = ngspice_vector(opened, tmp_path, "ac dec 10 1 1e10", "v(out)")
    _, v_in = ngspice_vector(opened, tmp_path, "ac dec 10 1 1e10", "v(fbin)")
    assert np.allclose(result.analysis.freq_hz, f, rtol=1e-8, atol=0)  # wrdata prints 9 significant digits
    assert np.allclose(result.analysis.t, -v_out / v_in, rtol=1e-6, atol=0)

    # The closed loop, from ngspice alone: its AC peak (Vin ac 1 to out, 200 points a decade) and its .pz poles.
    whole = measure(text, "out")
    assert whole.verdict == "pass" and whole.stable
    f_cl, v_cl = ngspice_vector(text, tmp_path, "ac dec 200 1k 1g", "v(out)")
    assert whole.analysis.peaking.peak_db == pytest.approx(20 * np.log10(np.max(np.abs(v_cl))), abs=0.01)  # 3.33 dB
    deck = tmp_path / "pz.cir"
    deck.write_text(_with_control(text, "pz inp 0 out 0 vol pol\nprint all"))
    run = subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True, timeout=120, check=True)
    poles = np.array([complex(float(r), float(i)) for r, i in re.findall(r"pole\(\d+\)\s*=\s*([-+0-9.eE]+),\s*([-+0-9.eE]+)", run.stdout)])
    pair = poles[np.argmax(np.abs(poles.imag))]  # the one complex pair: -2.83e7 +- j1.02e8 rad/s (16.9 MHz, damping 0.266)
    assert whole.analysis.poles.dominant_freq_hz == pytest.approx(abs(pair) / (2 * np.pi), rel=1e-4)
    assert whole.analysis.poles.dominant_damping == pytest.approx(-pair.real / abs(pair), rel=1e-4)
