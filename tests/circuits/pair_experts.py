"""The pair benches' references: an expert's differential probe at a node pair, run in plain ngspice, and its modal T.

Each deck in circuits/benches/expert/BENCH.TAG.sp named here is a bench with both nodes of a pair split by hand
(a series source and a shunt current source at each node, as an expert places them). The four modal runs of
Hurst and Lewis (1995) are written out below, and each mode's T comes from Tian et al.'s (2001) formula applied to
the modal quantities, also written out here (not netloop's code): v_d = v_p - v_n, v_c = (v_p + v_n) / 2,
i_d = (i_p - i_n) / 2, i_c = i_p + i_n.
"""

from __future__ import annotations

import re
import subprocess
import tempfile
from pathlib import Path

import numpy as np

BENCHES = Path(__file__).resolve().parent.parent.parent / "circuits" / "benches"
EXPERT = BENCHES / "expert"
SWEEP = ("dec", 10, 1e-2, 1e10)  # netloop's first sweep grid (Sweep()): the expert's frequencies are among netloop's
T_RTOL, T_ATOL = 1e-4, 1e-7  # as bench_experts: |T_netloop - T_expert| <= T_RTOL |T_expert| + T_ATOL

# run -> (series p, series n, shunt p, shunt n) AC magnitudes: one unit modal excitation each (Hurst and Lewis 1995)
RUNS = {
    "dm-series": (0.5, -0.5, 0.0, 0.0),
    "dm-shunt": (0.0, 0.0, 1.0, -1.0),
    "cm-series": (1.0, 1.0, 0.0, 0.0),
    "cm-shunt": (0.0, 0.0, 0.5, 0.5),
}


def _pair_run(stem: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(freq_hz, T_dm, T_cm) of one expert pair deck: four AC runs in one ngspice -b, the modal Tian formula written out."""
    text = (EXPERT / f"{stem}.sp").read_text()
    vec = dict(re.findall(r"(\w+)=(\S+)", re.search(r"^\* vectors: (.*)$", text, re.M).group(1)))
    sources = (vec["seriesp"], vec["seriesn"], vec["shuntp"], vec["shuntn"])
    kind, ppd, f0, f1 = SWEEP
    lines = [".control"]
    for k, (run, mags) in enumerate(RUNS.items(), start=1):
        lines += [f"alter @{s}[acmag]={m:g}" for s, m in zip(sources, mags)]
        lines += [f"ac {kind} {ppd} {f0:g} {f1:g}",
                  f"wrdata r{k}.out ac{k}.{vec['ap']} ac{k}.{vec['bp']} ac{k}.{vec['an']} ac{k}.{vec['bn']} "
                  f"ac{k}.i({vec['seriesp']}) ac{k}.i({vec['seriesn']})"]
    lines += ["quit", ".endc", ".end", ""]
    body = re.sub(r"(?m)^\.end\s*$", "", text).replace(".lib ../../", f".lib {BENCHES.parent.as_posix()}/")
    runs = {}
    with tempfile.TemporaryDirectory() as tmp:  # a folder of its own: parallel test workers never share a file
        (Path(tmp) / "deck.cir").write_text(body + "\n".join(lines))
        done = subprocess.run(["ngspice", "-b", "deck.cir"], cwd=tmp, capture_output=True, text=True, timeout=120)
        for k, run in enumerate(RUNS, start=1):
            out = Path(tmp) / f"r{k}.out"
            assert out.exists(), f"{stem}: ngspice wrote no data for {run}\n{done.stdout[-1500:]}{done.stderr[-1500:]}"
            data = np.loadtxt(out)
            f = data[:, 0]
            ap, bp, an, bn, ivp, ivn = (data[:, 1 + 3 * j] + 1j * data[:, 2 + 3 * j] for j in range(6))
            # i_b: the current the series source delivers into the load side b; ngspice's i(V) flows into its + terminal (b)
            runs[run] = (ap, bp, an, bn, -ivp, -ivn)
    ap, bp, an, bn, _, _ = runs["dm-series"]
    v_ad1, v_bd1 = ap - an, bp - bn
    *_, ibp, ibn = runs["dm-shunt"]
    i_bd2 = (ibp - ibn) / 2
    t_dm = -(v_ad1 + i_bd2) / (v_bd1 + i_bd2)  # Tian et al. 2001, differential mode (Hurst and Lewis 1995)
    ap, bp, an, bn, _, _ = runs["cm-series"]
    v_ac1, v_bc1 = (ap + an) / 2, (bp + bn) / 2
    *_, ibp, ibn = runs["cm-shunt"]
    i_bc2 = ibp + ibn
    t_cm = -(v_ac1 + i_bc2) / (v_bc1 + i_bc2)  # the same formula, common mode
    return f, t_dm, t_cm


_CACHE: dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]] = {}


def pair_expert(stem: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(freq_hz, T_dm, T_cm) of an expert pair deck, run once per test session."""
    if stem not in _CACHE:
        _CACHE[stem] = _pair_run(stem)
    return _CACHE[stem]


def same_t(result, f: np.ndarray, t: np.ndarray) -> bool:
    """netloop's T equals the reference at every reference frequency netloop also sampled (at least half of them)."""
    fn, tn = np.asarray(result.analysis.freq_hz), np.asarray(result.analysis.t)
    k = np.clip(np.searchsorted(fn, f), 0, fn.size - 1)
    k = np.where(np.abs(fn[np.maximum(k - 1, 0)] - f) < np.abs(fn[k] - f), np.maximum(k - 1, 0), k)
    same = np.isclose(fn[k], f, rtol=1e-9)
    assert same.sum() >= f.size // 2, "netloop sampled too few of the reference's frequencies"
    return bool(np.all(np.abs(tn[k][same] - t[same]) <= T_RTOL * np.abs(t[same]) + T_ATOL))
