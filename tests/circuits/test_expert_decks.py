"""The expert decks of the verification benches are right: two breaks of one loop agree, and ngspice's .pz agrees."""

from __future__ import annotations

import re
import subprocess

import numpy as np
import pytest

from bench_experts import BENCH, BENCHES, expert
from netloop.analysis import analyse
from netloop.analysis.poles import dominant_pole

pytestmark = pytest.mark.ngspice


def _dominant(stem: str) -> complex:
    """The dominant closed-loop pole (rad/s) fitted from an expert deck's 1/(1+T) (netloop.analysis.poles.dominant_pole, the
    definition every report uses); the record's pair figures name it when it is one of a complex pair, and nothing when it
    is real."""
    f, t = expert(stem)
    poles = analyse(f, t).poles
    assert poles is not None, stem
    p = dominant_pole(f, t, poles.poles_rad_s)
    assert p is not None, stem
    if p.imag == 0.0:
        assert poles.dominant_freq_hz is None and poles.dominant_damping is None, stem
    else:
        assert 2 * np.pi * poles.dominant_freq_hz == pytest.approx(abs(p), rel=1e-12), stem
        assert poles.dominant_damping == pytest.approx(-p.real / abs(p), rel=1e-12), stem
    return p


@pytest.mark.parametrize("name", sorted(BENCH))
def test_two_complete_expert_breaks_find_the_same_closed_loop_poles(name):
    """Two different hand-made breaks of one loop give the same dominant closed-loop pole and the same Nyquist verdict."""
    # Reference: the zeros of 1 + T at any break are the closed-loop poles of the one circuit (Bode's return
    # ratio; Tian et al. 2001), so two expert breaks must agree; the fit is netloop.analysis's AAA fit of 1/(1+T).
    bench = BENCH[name]
    one, two = bench.complete
    p1, p2 = _dominant(one), _dominant(two)
    assert abs(p1 - p2) < 2e-2 * abs(p1)
    for stem in (one, two):
        f, t = expert(stem)
        assert analyse(f, t).stable == bench.stable


@pytest.mark.parametrize("name", sorted(n for n, b in BENCH.items() if b.pz))
def test_expert_breaks_find_ngspice_pz_poles(name, tmp_path):
    """On the small benches, the expert break's dominant closed-loop pole is one of ngspice's .pz poles of the closed circuit."""
    bench = BENCH[name]
    deck = tmp_path / "pz.cir"
    text = re.sub(r"(?ms)^\.control.*?^\.endc\s*$", "", (BENCHES / name).read_text())
    text = re.sub(r"(?m)^\.end\s*$", "", text).replace(".lib ../", f".lib {BENCHES.parent.as_posix()}/")
    deck.write_text(text + f".control\npz {bench.pz} pol\nprint all\nquit\n.endc\n.end\n")
    run = subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True, timeout=120, cwd=BENCHES)
    found = re.findall(r"pole\(\d+\)\s*=\s*([-+0-9.eE]+),\s*([-+0-9.eE]+)", run.stdout)
    assert found, run.stdout[-2000:]
    poles = np.array([complex(float(r), float(i)) for r, i in found])  # ngspice .pz, rad/s
    assert np.all(poles.real < 0) == bench.stable
    want = _dominant(bench.pz_break)
    nearest = poles[np.argmin(np.abs(poles - want))]
    assert abs(nearest - want) < 2e-2 * abs(want)  # .pz prints 6 digits; the fit of 1/(1+T) is good to better than 1 %


@pytest.mark.parametrize("name", sorted(BENCH))
def test_every_loop_group_has_a_plausible_node_listed(name):
    """Each loop group the census finds has at least one of the bench's plausible break nodes, so every loop is covered here."""
    from netloop.jobs.discover import take_census

    census = take_census(BENCHES / name, sweep=False)
    for gc in census.groups:
        assert set(gc.group.nodes) & set(BENCH[name].nodes), (name, gc.group.label)
