"""A transistor-level two-stage amplifier (invented level-1 models): margins follow its compensation capacitor."""

from __future__ import annotations

import re
import shutil
import subprocess

import numpy as np
import pytest

from netloop.jobs.measure import measure

pytestmark = pytest.mark.ngspice

CC_VALUES = ("0.5p", "0.8p", "1.2p", "2p")


@pytest.fixture(scope="module")
def buffers(tmp_path_factory, request):
    """Copies of circuits/miller_buffer.cir (with its models) that differ only in `.param cc`."""
    root = request.config.rootpath / "circuits"
    out = {}
    for cc in CC_VALUES:
        folder = tmp_path_factory.mktemp(f"cc{cc}")
        shutil.copytree(root / "models", folder / "models")
        text = (root / "miller_buffer.cir").read_text()
        text, n = re.subn(r"(?m)^(\.param .*?)cc=\S+", rf"\g<1>cc={cc}", text)
        assert n == 1
        (folder / "miller_buffer.cir").write_text(text)
        out[cc] = folder / "miller_buffer.cir"
    return out


def _ngspice_closed_loop_poles(path) -> np.ndarray:
    """Poles of the closed buffer (input inp to output out) from ngspice's own pole-zero analysis."""
    deck = path.with_name("pz.cir")
    body = re.sub(r"(?m)^\.end\s*$", "", path.read_text())
    deck.write_text(body + "\n.control\npz inp 0 out 0 vol pol\nprint all\n.endc\n.end\n")
    run = subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True, cwd=path.parent, timeout=120)
    found = re.findall(r"pole\(\d+\)\s*=\s*([-+0-9.eE]+),\s*([-+0-9.eE]+)", run.stdout)
    assert found, run.stdout[-2000:]
    return np.array([complex(float(re_), float(im)) for re_, im in found])


def test_phase_margin_rises_with_the_compensation_capacitor(buffers):
    """Phase margin grows steadily with Cc, as Miller pole splitting predicts (Gray, Hurst, Lewis, Meyer,
    Analysis and Design of Analog Integrated Circuits, ch. 9 - textbook, from memory)."""
    pms = [measure(buffers[cc], "out").analysis.margins.phase_margin_deg for cc in CC_VALUES]
    assert all(b > a + 1.0 for a, b in zip(pms, pms[1:])), pms


@pytest.mark.parametrize("cc", ["0.5p", "2p"])
def test_dominant_closed_loop_poles_match_ngspice_pz(buffers, cc):
    """The dominant closed-loop pair fitted from the measured T equals ngspice's own .pz of the closed buffer within 1 %."""
    result = measure(buffers[cc], "out")
    poles = result.analysis.poles
    assert poles is not None
    reference = _ngspice_closed_loop_poles(buffers[cc])  # ngspice pz analysis
    pair = reference[reference.imag > 0]
    dominant = pair[np.argmin(-pair.real / np.abs(pair))]  # least damped pair
    assert poles.dominant_freq_hz == pytest.approx(abs(dominant) / (2 * np.pi), rel=1e-2)
    assert poles.dominant_damping == pytest.approx(-dominant.real / abs(dominant), rel=1e-2)
