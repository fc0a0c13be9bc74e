"""The verification benches' references: each plausible break node's expert decks, the expert's T from plain ngspice, and the judge.

Each expert deck in circuits/benches/expert/ is a bench with one node split by hand, the probe placed where an
expert puts it; it runs in plain ngspice and its T comes from Tian's formula written out here. Where an expert
would accept either side for a bridging element (a Miller branch at the node, an off switch), each side has its
own deck and either T is right. Used by test_expert_decks.py (the references checked) and test_benches.py
(netloop checked against them).
"""

from __future__ import annotations

import re
import subprocess
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np


BENCHES = Path(__file__).resolve().parent.parent.parent / "circuits" / "benches"
EXPERT = BENCHES / "expert"
SWEEP = ("dec", 10, 1e-2, 1e10)  # the expert decks' sweep: the decade grid of netloop's own first sweep (Sweep())
T_RTOL, T_ATOL = 1e-4, 1e-7  # |T_netloop - T_expert| <= T_RTOL |T_expert| + T_ATOL (Tian's formula cancels to ~1e-10 where |T| << 1)


@dataclass(frozen=True)
class Bench:
    """A bench, the expert decks of each plausible break node, and the circuit's stability with its source."""

    nodes: dict[str, tuple[str, ...]]  # break node -> expert deck stems (any of them is a right split)
    stable: bool
    complete: tuple[str, str]  # two expert decks whose breaks open every loop of one group but local compensation
    pz: str | None = None  # ngspice .pz input/output for the closed circuit ("in 0 out 0 vol"), None where .pz fails
    pz_break: str = ""  # the expert deck whose dominant closed-loop pole .pz must list (one whose loop that transfer shows)


BENCH = {
    "miller_tb.cir": Bench(
        {"fb": ("miller_tb.fb",), "out": ("miller_tb.out",), "xop.o1": ("miller_tb.o1.rz-load", "miller_tb.o1.rz-driver")},
        True, ("miller_tb.fb", "miller_tb.out")),
    "ldo_cc_out.cir": Bench(
        {"fb": ("ldo_cc_out.fb",), "ea": ("ldo_cc_out.ea.rz-load", "ldo_cc_out.ea.rz-driver"),
         "vout": ("ldo_cc_out.vout.cc-load", "ldo_cc_out.vout.cc-driver")},
        True, ("ldo_cc_out.fb", "ldo_cc_out.ea.rz-driver"), pz="vout 0 vout 0 cur", pz_break="ldo_cc_out.fb"),
    "bandgap_reg.cir": Bench(
        {"fb": ("bandgap_reg.fb",), "vout": ("bandgap_reg.vout",), "xreg.ea": ("bandgap_reg.ea",),
         "xreg.xbg.xamp.out": ("bandgap_reg.pg",), "xreg.xbg.pg": ("bandgap_reg.pg",), "xreg.pbias": ("bandgap_reg.pg",),
         "xreg.xbg.va": ("bandgap_reg.va",), "xreg.xbg.vb": ("bandgap_reg.vb",)},
        True, ("bandgap_reg.fb", "bandgap_reg.vout")),
    "fc_ota_cmfb.cir": Bench(
        {"cm": ("fc_ota_cmfb.cm",), "cmfb": ("fc_ota_cmfb.cmfb",), "cmd": ("fc_ota_cmfb.cmd",), "xp": ("fc_ota_cmfb.xp",),
         "outn": ("fc_ota_cmfb.outn",)},
        True, ("fc_ota_cmfb.cm", "fc_ota_cmfb.cmfb")),
    "fd_cap_amp.cir": Bench(
        {"xp": ("fd_cap_amp.xp.switch-driver", "fd_cap_amp.xp.switch-load"), "outn": ("fd_cap_amp.outn",),
         "cm": ("fd_cap_amp.cm",), "cmfb": ("fd_cap_amp.cmfb",)},
        True, ("fd_cap_amp.cm", "fd_cap_amp.cmfb")),  # ngspice 39 .pz lists a pole pair 20 % off what every break fits here
    "fd_miller_pair.cir": Bench(
        {"xamp.cm": ("fd_miller_pair.cm",), "xamp.cmfb": ("fd_miller_pair.cmfb",),
         "xamp.o1p": ("fd_miller_pair.o1p.rz-load", "fd_miller_pair.o1p.rz-driver"), "xamp.outp": ("fd_miller_pair.xamp-outp",),
         "outp": ("fd_miller_pair.outp",), "xp": ("fd_miller_pair.xp",)},
        True, ("fd_miller_pair.cm", "fd_miller_pair.cmfb")),
    "tb_open_copy.cir": Bench(
        {"out": ("tb_open_copy.out",), "xbuf.o1": ("tb_open_copy.xbuf.o1.rz-load", "tb_open_copy.xbuf.o1.rz-driver"),
         "xol.o1": ("tb_open_copy.xol.o1",), "xol.out": ("tb_open_copy.xol.out",)},
        True, ("tb_open_copy.out", "tb_open_copy.xbuf.o1.rz-load"), pz="in 0 out 0 vol", pz_break="tb_open_copy.out"),
}
CASES = [(b, n) for b, bench in BENCH.items() for n in bench.nodes]


# -- the expert's T, from plain ngspice --------------------------------------------------------


def _expert_run(stem: str) -> tuple[np.ndarray, np.ndarray]:
    """(freq_hz, T) of one expert deck: two AC runs in one ngspice -b, T by Tian et al. (2001) written out."""
    text = (EXPERT / f"{stem}.sp").read_text()
    vec = dict(re.findall(r"(\w+)=(\S+)", re.search(r"^\* vectors: (.*)$", text, re.M).group(1)))
    a, b, series, shunt = vec["a"], vec["b"], vec["series"], vec["shunt"]
    kind, ppd, f0, f1 = SWEEP
    control = (f".control\nac {kind} {ppd} {f0:g} {f1:g}\nalter @{series}[acmag]=0\nalter @{shunt}[acmag]=1\n"
               f"ac {kind} {ppd} {f0:g} {f1:g}\nwrdata t.out ac1.{a} ac1.{b} ac2.{b} ac2.i({series})\nquit\n.endc\n.end\n")
    body = re.sub(r"(?m)^\.end\s*$", "", text).replace(".lib ../../", f".lib {BENCHES.parent.as_posix()}/")
    with tempfile.TemporaryDirectory() as tmp:  # a folder of its own: parallel test workers never share a file
        (Path(tmp) / "deck.cir").write_text(body + control)
        run = subprocess.run(["ngspice", "-b", "deck.cir"], cwd=tmp, capture_output=True, text=True, timeout=120)
        out = Path(tmp) / "t.out"
        assert out.exists(), f"{stem}: ngspice wrote no data\n{run.stdout[-1500:]}{run.stderr[-1500:]}"
        data = np.loadtxt(out)
    f = data[:, 0]
    va1, vb1, _vb2, iv2 = (data[:, 1 + 3 * k] + 1j * data[:, 2 + 3 * k] for k in range(4))
    # Run 1 drives the series source (v_b - v_a = 1), run 2 the shunt source (1 A into a). i_b2 is the current the
    # series source delivers into the load side b in run 2: ngspice's i(V) flows into its + terminal (b), so i_b2 = -i(V).
    ib2 = -iv2
    t = -(va1 + ib2) / (vb1 + ib2)  # Tian, Visvanathan, Hantgan, Kundert, "Striving for small-signal stability", 2001
    return f, t


_EXPERT: dict[str, tuple[np.ndarray, np.ndarray]] = {}


def expert(stem: str) -> tuple[np.ndarray, np.ndarray]:
    if stem not in _EXPERT:
        _EXPERT[stem] = _expert_run(stem)
    return _EXPERT[stem]


def matches(result, stem: str) -> bool:
    """netloop's T equals the expert deck's at every frequency of the expert's sweep netloop also sampled."""
    f, t = expert(stem)
    fn, tn = np.asarray(result.analysis.freq_hz), np.asarray(result.analysis.t)
    k = np.clip(np.searchsorted(fn, f), 0, fn.size - 1)
    k = np.where(np.abs(fn[np.maximum(k - 1, 0)] - f) < np.abs(fn[k] - f), np.maximum(k - 1, 0), k)
    same = np.isclose(fn[k], f, rtol=1e-9)
    assert same.sum() >= f.size // 2, f"{stem}: netloop sampled too few of the expert's frequencies"
    return bool(np.all(np.abs(tn[k][same] - t[same]) <= T_RTOL * np.abs(t[same]) + T_ATOL))


def judge(result, bench: Bench, node: str) -> str | None:
    """None when the result is right (inconclusive, or the expert's T with the circuit's verdict), else what is wrong."""
    if result.verdict == "inconclusive":
        return None
    stems = bench.nodes.get(node)
    if stems is None:
        return f"{result.verdict} at {node}, a break no expert deck covers"
    if not any(matches(result, s) for s in stems):
        return f"{result.verdict} at {node} with a T that equals no expert split there ({', '.join(stems)})"
    if result.stable != bench.stable:
        return f"{result.verdict} at {node}: {'stable' if result.stable else 'unstable'}, but the circuit is {'stable' if bench.stable else 'unstable'}"
    return None




# -- a group measured as a mirror pair (check without --at on a fully differential bench) ------------------------------

# (bench, the pair's nets) -> expert pair decks (circuits/benches/expert; pair_experts.py runs them): DM and CM T there.
# Swapping the nets leaves both modes' T as they are (the DM excitation and its reading change sign together).
PAIR_DECKS = {("fd_miller_pair.cir", frozenset({"outp", "outn"})): ("fd_miller_pair.out",),
              ("fd_miller_pair.cir", frozenset({"xamp.outp", "xamp.outn"})): ("fd_miller_pair.out",),
              ("fd_cap_amp.cir", frozenset({"outp", "outn"})): ("fd_cap_amp.pair-out",)}
# bench -> an expert split at one output: a single-ended break excites both modes, so 1 + T there has the zeros of both
# (a break at the common-mode sense node sees only the common mode's: a matched pair's DM signal never reaches it)
BOTH_MODES = {"fd_cap_amp.cir": "fd_cap_amp.outn", "fc_ota_cmfb.cir": "fc_ota_cmfb.outn", "fd_miller_pair.cir": "fd_miller_pair.outp"}


def judge_pair(result, name: str) -> str | None:
    """None when a mode's result measured at a mirror pair is right, else what is wrong: inconclusive; or the circuit's
    stability, and its T equal to an expert pair deck's where one covers the pair, and in any case its closed-loop poles
    up to twice its crossover among those of the bench's expert split at one output (BOTH_MODES). Reference: the zeros of 1 + T
    at any break are poles of the one closed circuit (Bode's return ratio; Tian et al. 2001), and each mode's are the
    poles of its half circuit (Hurst and Lewis 1995); the poles are netloop.analysis's rational fit of each 1/(1+T)."""
    from netloop.analysis import analyse
    from pair_experts import pair_expert, same_t

    if result.verdict == "inconclusive":
        return None
    bench = BENCH[name]
    if result.stable != bench.stable:
        return f"{result.label}: {'stable' if result.stable else 'unstable'}, but the circuit is {'stable' if bench.stable else 'unstable'}"
    nets, mode = result.breaks.node.split(" (")[0].split(","), result.breaks.node.split(" (")[1].split()[0]
    for stem in PAIR_DECKS.get((name, frozenset(nets)), ()):
        f, t_dm, t_cm = pair_expert(stem)
        if not same_t(result, f, t_dm if mode == "differential" else t_cm):
            return f"{result.label}: T equals no expert pair deck ({stem}, {mode} mode)"
    f, t = expert(BOTH_MODES[name])
    reference = np.asarray(analyse(f, t).poles.poles_rad_s)
    band = 2 * np.pi * 2 * result.analysis.margins.unity_gain_hz  # beyond, a pole the output barely shows may be missed there
    found = [p for p in result.analysis.poles.poles_rad_s if abs(p) <= band]
    far = [p for p in found if np.min(np.abs(reference - p)) > 2e-2 * abs(p) + 2 * np.pi]
    return f"{result.label}: closed-loop poles {far} are none of the circuit's ({BOTH_MODES[name]})" if far or not found else None
