"""Two benches written as designers write them, checked end to end against ngspice itself: the census, the automatic
break, T against the loop opened by hand, and the verdict against a kicked transient (circuits/testbench/bandgap_bjt.cir,
circuits/testbench/ldo_nmos_switch.cir)."""

from __future__ import annotations

import re
import subprocess
from pathlib import Path

import numpy as np
import pytest

from hand_opened import ngspice_vector
from netloop.analysis import analyse
from netloop.analysis.poles import dominant_pole
from netloop.jobs.discover import check_loops

pytestmark = pytest.mark.ngspice

AC = "ac dec 100 1 1e10"


@pytest.fixture(scope="module")
def benches(installed_circuits) -> Path:
    """circuits/testbench in a copy of circuits/ whose sky130/process.spice reaches the installed process."""
    return installed_circuits / "testbench"


def _by_hand(text: str, folder: Path, returned: str, driven: str) -> tuple[np.ndarray, np.ndarray]:
    """T = -v(returned)/v(driven) of a deck opened by hand, by ngspice's own AC analysis (written beside the bench)."""
    f, r = ngspice_vector(text, folder, AC, f"v({returned})")
    _, d = ngspice_vector(text, folder, AC, f"v({driven})")
    return f, -r / d


def _agrees(result, f: np.ndarray, t: np.ndarray, rel: float) -> None:
    """netloop's T equals the hand-opened T to ``rel`` wherever |T| is above -40 dB (log-frequency interpolation)."""
    a = result.analysis
    ref = np.interp(np.log(a.freq_hz), np.log(f), t.real) + 1j * np.interp(np.log(a.freq_hz), np.log(f), t.imag)
    loud = (np.abs(a.t) > 1e-2) & (a.freq_hz >= f[0]) & (a.freq_hz <= f[-1])
    assert np.max(np.abs(a.t - ref)[loud] / np.abs(ref)[loud]) < rel


def _ringing(deck: Path, kick_at: float) -> tuple[float, float, float]:
    """(frequency in Hz, decay per half period, what is left at the end) of the ringing after a kick, from ngspice's own
    transient (wrdata): the first four peaks' spacing, the median of their ratios, and the largest swing over the last
    sixth of the record relative to the largest of all."""
    subprocess.run(["ngspice", "-b", deck.name], cwd=deck.parent, capture_output=True, check=True, timeout=300)
    t, v = np.loadtxt(deck.parent / "_ring.txt", unpack=True)
    v = v - np.median(v[(t > 0.5 * kick_at) & (t < kick_at)])
    after = t > kick_at * 1.01
    t, v = t[after], v[after]
    peaks = [i for i in range(1, v.size - 1) if abs(v[i]) >= abs(v[i - 1]) and abs(v[i]) > abs(v[i + 1]) and abs(v[i]) > 1e-3 * np.max(np.abs(v))]
    half = np.diff(t[peaks[:4]])
    ratios = np.abs(v[peaks[1:4]]) / np.abs(v[peaks[:3]])
    left = float(np.max(np.abs(v[t > t[-1] - (t[-1] - t[0]) / 6])) / np.max(np.abs(v)))
    return 1.0 / (2.0 * float(np.mean(half))), float(np.median(ratios)), left


def test_bandgap_census_break_and_return_ratio(benches):
    """The bandgap's six loops form one group broken at pg, the op-amp's output, with the Miller branch kept on the driver
    side; T equals the loop opened by hand there (a copy of the core on the driver side) and the closed-loop pair rings in
    ngspice's transient at the frequency and with the decay it predicts."""
    path = benches / "bandgap_bjt.cir"
    (group,) = check_loops(path).groups
    assert len(group.census.group.loops) == 6 and group.census.chosen == "pg"
    r = group.result
    assert r.verdict == "pass" and sorted(r.breaks.driver_terminals) == ["cc.p", "m6.d", "m7.d", "ms1.d"]
    text = path.read_text()
    opened = text
    for card in ("MP1 va pg ", "MP2 vb pg ", "MP3 vbg pg "):
        opened = opened.replace(card, card.replace(" pg ", " pgl "))
    copy = ("Lbrk pg pgl 1e12\nCbrk pgl vt 1e12\nVt vt 0 dc 0 ac 1\nMP1r var pg vdd vdd pmos_inv w=20u l=4u\n"
            "MP2r vbr pg vdd vdd pmos_inv w=20u l=4u\nMP3r vbgr pg vdd vdd pmos_inv w=20u l=4u\nQ1r 0 0 var pnp_inv 1\n"
            "R1r vbr vcr {r1}\nQ2r 0 0 vcr pnp_inv 8\nR2r vbgr vdr {r2}\nQ3r 0 0 vdr pnp_inv 1\nMS2r sur vbgr 0 0 nmos_inv w=4u l=1u\n"
            "Rsur vdd sur 2Meg\n")
    f, t = _by_hand(opened.replace("\n.end\n", "\n" + copy + ".end\n"), benches, "pg", "pgl")
    _agrees(r, f, t, 0.05)  # the copy's drains are not the core's: 3.3 % at 500 MHz, where |T| is -30 dB
    by_hand = analyse(f, t).margins  # 92.68 deg at 39.5 MHz, 11.37 dB
    assert r.analysis.margins.phase_margin_deg == pytest.approx(by_hand.phase_margin_deg, abs=0.5)
    assert r.analysis.margins.unity_gain_hz == pytest.approx(by_hand.unity_gain_hz, rel=1e-2)
    assert r.analysis.margins.gain_margin_db == pytest.approx(by_hand.gain_margin_db, abs=0.1)
    deck = path.with_name("_bg_kick.cir")
    deck.write_text(text.replace("\n.end\n", "\nIkick 0 pg pulse(0 1u 100n 0.1n 0.1n 1n 1)\n.control\ntran 0.02n 300n\n"
                                 "wrdata _ring.txt v(pg)\nquit\n.endc\n.end\n"))
    freq_hz, _, left = _ringing(deck, 100e-9)  # reference: ngspice's transient, about 83 MHz, 1e-3 of the swing left at the end
    a = r.analysis
    p = dominant_pole(a.freq_hz, a.t, a.poles.poles_rad_s)  # 91.8 MHz, damping 0.42
    assert p.real < 0 and left < 1e-2  # stable, as the transient decays (its later peaks are shaped by the other poles too)
    assert abs(p.imag) / (2 * np.pi) == pytest.approx(freq_hz, rel=0.1)


@pytest.mark.parametrize(("ctl0", "pm_deg"), [("0", 55.9), ("1.8", 89.0)])
def test_nmos_ldo_census_ignores_the_open_loop_copy_and_matches_the_loop_opened_by_hand(benches, ctl0, pm_deg):
    """The LDO's census finds its one loop and nothing in the open-loop copy of its error amplifier; broken at fb (driven by
    R1), T equals the loop opened by hand there (with the OTA's input copied on the driver side) at light and heavy load,
    the load set by the voltage-controlled switch S1 from the .param ctl0."""
    text = (benches / "ldo_nmos_switch.cir").read_text()
    assert "ctl0=0 " in text
    path = benches / f"_ldo_{ctl0}.cir"
    path.write_text(text.replace("ctl0=0 ", f"ctl0={ctl0} "))
    (group,) = check_loops(path).groups
    assert len(group.census.group.loops) == 1 and not any(n.startswith("xol.") for n in group.census.group.nodes)
    r = group.result
    assert group.census.chosen == "fb" and r.breaks.driver_terminals == ("r1.n",) and r.verdict == "pass"
    probe = path.with_name(f"_ldo_op_{ctl0}.cir")
    probe.write_text(path.read_text().replace("\n.end\n", "\n.control\nop\nprint v(ng)\nquit\n.endc\n.end\n"))
    op = subprocess.run(["ngspice", "-b", probe.name], cwd=benches, capture_output=True, text=True, timeout=120, check=True)
    ng = re.search(r"^v\(ng\) = (\S+)", op.stdout, re.MULTILINE).group(1)
    opened = path.read_text().replace("Xea ref fb ng vcp 0 ib1 ota5", "Xea ref fbl ng vcp 0 ib1 ota5\nLbrk fb fbl 1e12\n"
                                      "Cbrk fbl vt 1e12\nVt vt 0 dc 0 ac 1\nIbrep vcp ibrep dc {ibias}\n"
                                      f"Xrep ref fb ngrep vcp 0 ibrep ota5\nVngrep ngrep 0 dc {ng}")
    f, t = _by_hand(opened.replace("Vtst vtst 0 dc {vref} ac 1", "Vtst vtst 0 dc {vref}"), benches, "fb", "fbl")
    _agrees(r, f, t, 5e-3)  # 0.08 % at light load, 0.05 % at heavy load
    by_hand = analyse(f, t).margins
    assert r.analysis.margins.phase_margin_deg == pytest.approx(by_hand.phase_margin_deg, abs=0.1)
    assert r.analysis.margins.phase_margin_deg == pytest.approx(pm_deg, abs=0.5)


def test_nmos_ldo_rings_at_light_load_as_its_closed_loop_poles_say(benches):
    """At light load a 100 uA, 5 ns kick into vout rings at the measured closed-loop pair's frequency and decays by its
    damping, in ngspice's own transient (the load-step pulse of Vctl taken out: the switch stays open)."""
    text = (benches / "ldo_nmos_switch.cir").read_text()
    (group,) = check_loops(benches / "ldo_nmos_switch.cir").groups
    a = group.result.analysis
    p = dominant_pole(a.freq_hz, a.t, a.poles.poles_rad_s)  # 3.56 MHz, damping 0.546
    deck = benches / "_ldo_kick.cir"
    deck.write_text(text.replace(" pulse({ctl0} {ctl1} 20u 100n 100n 20u 60u)", "").replace(
        "\n.end\n", "\nIkick 0 vout pulse(0 100u 5u 1n 1n 5n 1)\n.control\ntran 1n 8u\nwrdata _ring.txt v(vout)\nquit\n.endc\n.end\n"))
    freq_hz, decay, _ = _ringing(deck, 5e-6)  # reference: about 2.98 MHz, 0.13 a half period
    assert abs(p.imag) / (2 * np.pi) == pytest.approx(freq_hz, rel=0.02)
    assert np.exp(p.real * np.pi / abs(p.imag)) == pytest.approx(decay, abs=0.02)
