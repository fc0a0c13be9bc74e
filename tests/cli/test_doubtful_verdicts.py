"""Doubtful measurements never pass (issue 15.3): each of these gave PASS with exit status 0 before."""

from __future__ import annotations

import math
import re
import shutil
from pathlib import Path

import pytest

from netloop.cli.main import main

ROOT = Path(__file__).resolve().parents[2]
LOOP = """behavioural loop: gain 1000 over a divider of 1/2, one pole (invented)
vin in 0 dc 0.9
e1 a 0 in fb 1000
r1 a out 1k
c1 out 0 1n
rf out fb 1k
rg fb 0 1k
.end
"""


@pytest.mark.ngspice
def test_a_sweep_stopped_below_the_crossover_is_inconclusive(tmp_path, capsys):
    """--fmax 1meg stops the sweep where |T| is still 37.8 dB (the closed form below, whose crossover near 80 MHz lies
    above): INCONCLUSIVE with exit 3 and the advice to let the sweep run higher, never PASS."""
    path = tmp_path / "loop.cir"
    path.write_text(LOOP)
    assert main(["check", str(path), "--at", "fb", "--fmax", "1meg"]) == 3
    first = capsys.readouterr().out.splitlines()[0]
    assert first.startswith("INCONCLUSIVE  the data supports no verdict: the sweep ends at 1e+06 Hz with |T| still")
    # closed form: r1 drives c1 and rf + rg (2k), so T = 1000 (2/3) (1/2) / (1 + s (1k || 2k) 1n)
    top_db = 20 * math.log10(1000 / 3 / abs(1 + 2j * math.pi * 1e6 * (2e3 / 3) * 1e-9))
    shown = float(re.search(r"with \|T\| still ([-\d.]+) dB", first).group(1))
    assert shown == pytest.approx(top_db, abs=0.05)
    assert "let the sweep run higher (drop --fmax, or raise it)" in first


@pytest.fixture
def ldo(tmp_path) -> Path:
    """A copy of the demo LDO (invented models) with its model library, in tmp_path."""
    shutil.copytree(ROOT / "circuits" / "models", tmp_path / "models")
    path = tmp_path / "ldo.cir"
    shutil.copyfile(ROOT / "circuits" / "ldo.cir", path)
    return path


@pytest.mark.ngspice
def test_a_driver_naming_a_gate_is_refused(ldo, capsys):
    """--driver m1.g names the gate of the error amplifier's input (an input, common practice): the T it gives fails its
    checks, so the break is refused with exit 2 and the outputs on the node are named, never 'PASS ... does not regulate'."""
    assert main(["check", str(ldo), "--at", "fb", "--driver", "m1.g"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("netloop: error: --driver m1.g names only inputs on node fb (gates, bases or control inputs)")


@pytest.mark.ngspice
@pytest.mark.parametrize("size", ["m=0", "w=0"])
def test_a_pass_device_of_no_size_is_inconclusive(ldo, capsys, size):
    """The LDO's pass device with m=0 or w=0 carries no signal, so |T| is far below -60 dB everywhere: INCONCLUSIVE, exit 3, 'the break measured no loop', never 'PASS ... does not regulate'.

    Nothing holds vout then but the divider, so the operating point is named first as not credible."""
    text = ldo.read_text()
    card = "Mpass vout gate vin vin pch w=2000u l=1u"
    assert card in text
    ldo.write_text(text.replace(card, card + " m=0" if size == "m=0" else card.replace("w=2000u", "w=0")))
    assert main(["check", str(ldo), "--at", "fb"]) == 3
    out = capsys.readouterr().out
    # closed form: Iload (10 mA) flows through R1 + R2 (150k) alone, so vout = -1500 V, and fb = -1000 V from the divider
    assert out.startswith("INCONCLUSIVE  the data supports no verdict: the operating point ngspice returned is not credible: "
                          "vout at -1500 V, fb at -1000 V")
    assert "  - loop-present: |T| is below -60 dB at every frequency" in out
