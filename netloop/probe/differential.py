"""break_pair: break two nodes together with a differential probe and form modal (DM/CM) probe quantities.

Hurst and Lewis (IEEE Trans. Circuits and Systems II, 1995) measure the two loops of a fully
differential circuit by breaking both outputs at once and injecting equal-and-opposite signals
(differential mode, DM) or equal signals (common mode, CM). Here each node p, n gets its own
probe exactly as ``break_loop`` inserts it: a series source ``V b a`` (v_b - v_a = v_s) and a
shunt source ``I 0 a`` pushing current into the driver side a.

Modal quantities (one power-conserving set; v are node voltages, i currents delivered into b)::

    v_d = v_p - v_n        i_d = (i_p - i_n) / 2
    v_c = (v_p + v_n) / 2  i_c = i_p + i_n

so that v_p i_p + v_n i_n = v_d i_d + v_c i_c (with v_p = v_c + v_d/2, i_p = i_c/2 + i_d, ...):
the modal voltage and current of each mode are conjugate, as the node pair's are.

The four runs, each a unit excitation of one modal source and zero of the other three:

    run        series p  series n  shunt p  shunt n   modal excitation
    dm-series   +1/2 V    -1/2 V      0        0       v_sd = 1, v_sc = 0
    dm-shunt      0         0       +1 A     -1 A      i_sd = 1, i_sc = 0
    cm-series    +1 V      +1 V       0        0       v_sc = 1, v_sd = 0
    cm-shunt      0         0      +1/2 A   +1/2 A     i_sc = 1, i_sd = 0

Tian's formula for each mode. The probe's Kirchhoff relations hold node by node,
v_b - v_a = v_s and i_a + i_shunt = i_b; the modal maps are linear and applied alike to a, b and
the sources, so the same relations hold mode by mode: v_bd - v_ad = v_sd, i_ad + i_sd = i_bd.
When the two halves match, a mirror exchanging p and n is a symmetry of the circuit; DM signals
are odd and CM signals even under it, so a DM excitation gives no CM response and vice versa,
and each mode is a single-node break of its own half circuit: the DM half circuit is node p with
the n side held at -v_p (series 1/2 V gives v_d = 2 v_p, so the half circuit's unit-normalised
va1 equals v_ad), the CM half circuit node p with the n side at +v_p (shunt 1/2 A per node gives
i_c = 2 i_p, the half circuit's normalised ib2). Tian et al. (2001) then apply word for word:

    T_dm = -(v_ad1 + i_bd2) / (v_bd1 + i_bd2),   1 / (1 + T_dm) = v_bd1 + i_bd2
    T_cm = -(v_ac1 + i_bc2) / (v_bc1 + i_bc2),   1 / (1 + T_cm) = v_bc1 + i_bc2

with the series quantities from that mode's series run and i_b2 from its shunt run (likewise
Middlebrook's form with i_a2 = i_b2 - 1).

Mismatched halves. Then a DM excitation also returns a CM signal and vice versa, and the
per-mode figures are no longer exact return ratios of one loop; they stay what the formula above
gives from the diagonal entries (during a DM run the series sources keep the CM path closed, so
T_dm is read with the CM loop closed, as a designer would see it). How far they can be trusted is
told by the coupling: the four runs give 2 x 2 modal matrices (rows: response mode d, c; columns:
excitation mode d, c) V_a1, V_b1, I_b2, and the signal returned around the loop is
R = -(V_a1 + I_b2), Tian's numerator (for one node it is T / (1 + T)). With I_b2 brought to the
voltage frame (v_d, v_c) -- the current frame is the voltage frame scaled by diag(1/2, 2), which
leaves diagonal entries alone and scales R_dc by 4, R_cd by 1/4 -- the coupling is
|R_cd / R_dd| (CM returned per DM returned in the DM runs) and |R_dc / R_cc|. Both vanish
exactly for matched halves; they use both runs, so an ideal current driver (where the series run
carries nothing) or an ideal voltage driver (where the shunt run carries nothing) still shows it.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace

import numpy as np

from netloop.errors import ProbeError
from netloop.netlist.model import Netlist
from netloop.probe.breaking import break_loop, locate_split, split_loop
from netloop.probe.records import ProbedNetlist, ProbeQuantities

__all__ = ["MODES", "RUNS", "PairProbe", "PairQuantities", "break_pair", "modal_currents", "modal_voltages"]

MODES = ("differential", "common")
RUNS = ("dm-series", "dm-shunt", "cm-series", "cm-shunt")

# (series p, series n, shunt p, shunt n) of each run, as in the module docstring
_EXCITATION = {
    "dm-series": (0.5, -0.5, 0.0, 0.0),
    "dm-shunt": (0.0, 0.0, 1.0, -1.0),
    "cm-series": (1.0, 1.0, 0.0, 0.0),
    "cm-shunt": (0.0, 0.0, 0.5, 0.5),
}


def modal_voltages(p, n) -> tuple[np.ndarray, np.ndarray]:
    """(v_d, v_c) = (v_p - v_n, (v_p + v_n) / 2)."""
    p, n = np.asarray(p, dtype=complex), np.asarray(n, dtype=complex)
    return p - n, (p + n) / 2.0


def modal_currents(p, n) -> tuple[np.ndarray, np.ndarray]:
    """(i_d, i_c) = ((i_p - i_n) / 2, i_p + i_n): conjugate to modal_voltages, v_p i_p + v_n i_n = v_d i_d + v_c i_c."""
    p, n = np.asarray(p, dtype=complex), np.asarray(n, dtype=complex)
    return (p - n) / 2.0, p + n


def _ratio(num: np.ndarray, den: np.ndarray) -> np.ndarray:
    """num / den, with 0 where both are 0 (no signal at all) and inf where only den is 0."""
    out = np.where(num > 0, np.inf, 0.0)
    np.divide(num, den, out=out, where=den > 0)
    return out


# entry [r, c] of a current-frame matrix times _TO_VOLTAGE_FRAME[r, c] is the voltage-frame entry
_TO_VOLTAGE_FRAME = np.array([[1.0, 4.0], [0.25, 1.0]])[:, :, None]


@dataclass(frozen=True, slots=True)
class PairQuantities:
    """Modal probe quantities of the four runs: ``[response mode, excitation mode, frequency]`` arrays, modes (d, c).

    ``va1``/``vb1`` come from the series runs (v_d, v_c of the driver / load side), ``ib2`` from
    the shunt runs (i_d, i_c delivered into the load side); every excitation is a unit modal one.
    """

    va1: np.ndarray
    vb1: np.ndarray
    ib2: np.ndarray

    def mode(self, k: int) -> ProbeQuantities:
        """The single-node probe quantities of mode k (0 differential, 1 common): the diagonal entries."""
        ib2 = self.ib2[k, k]
        return ProbeQuantities(self.va1[k, k], self.vb1[k, k], ib2 - 1.0, ib2)

    @property
    def differential(self) -> ProbeQuantities:
        return self.mode(0)

    @property
    def common(self) -> ProbeQuantities:
        return self.mode(1)

    @property
    def returned(self) -> np.ndarray:
        """R = -(V_a1 + I_b2) in the voltage frame (v_d, v_c): the signal returned around the loop per unit injection."""
        return -(self.va1 + self.ib2 * _TO_VOLTAGE_FRAME)

    @property
    def dm_to_cm(self) -> np.ndarray:
        """|R_cd / R_dd|: CM returned per DM returned in the DM runs (0 for matched halves)."""
        r = self.returned
        return _ratio(np.abs(r[1, 0]), np.abs(r[0, 0]))

    @property
    def cm_to_dm(self) -> np.ndarray:
        """|R_dc / R_cc|: DM returned per CM returned in the CM runs (0 for matched halves)."""
        r = self.returned
        return _ratio(np.abs(r[0, 1]), np.abs(r[1, 1]))


@dataclass(frozen=True, slots=True)
class PairProbe:
    """A NEW netlist with both nodes broken, each half's break, and the four runs of the differential probe.

    ``p`` and ``n`` describe each node's break exactly as ``break_loop`` does (source names,
    vectors, terminals); their ``netlist`` is the final one holding both probes.
    """

    netlist: Netlist
    p: ProbedNetlist
    n: ProbedNetlist
    warnings: tuple[str, ...] = ()

    @property
    def nodes(self) -> tuple[str, str]:
        return (self.p.node, self.n.node)

    @property
    def sources(self) -> tuple[str, str, str, str]:
        """(series p, series n, shunt p, shunt n): flattened ngspice names."""
        return (self.p.series_source, self.n.series_source, self.p.shunt_source, self.n.shunt_source)

    @property
    def runs(self) -> tuple[tuple[str, Mapping[str, float]], ...]:
        """(run name, AC magnitude of each probe source) for the four runs, in RUNS order."""
        return tuple((name, dict(zip(self.sources, _EXCITATION[name]))) for name in RUNS)

    @property
    def copied_subcircuits(self) -> tuple[tuple[str, str], ...]:
        """(original, copy in the final netlist) for breaks inside an instance; a copy of a copy counts once."""
        final = dict(self.n.copied_subcircuits)
        out = [(original, final.pop(copy, copy)) for original, copy in self.p.copied_subcircuits]
        return (*out, *final.items())

    @property
    def save(self) -> tuple[str, ...]:
        return (*self.p.vectors.save, *self.n.vectors.save)

    def quantities(self, vectors: Mapping[str, Mapping[str, np.ndarray]]) -> PairQuantities:
        """Modal quantities from the vectors of each run (run name -> vector name -> complex array)."""
        missing = [r for r in RUNS if r not in vectors]
        if missing:
            raise ProbeError(f"the differential probe needs the runs {', '.join(RUNS)}; missing {', '.join(missing)}")
        va = np.empty((2, 2), dtype=object)
        vb = np.empty((2, 2), dtype=object)
        ib = np.empty((2, 2), dtype=object)
        for col, (series_run, shunt_run) in enumerate((("dm-series", "dm-shunt"), ("cm-series", "cm-shunt"))):
            qp = self.p.vectors.quantities(vectors[series_run], vectors[shunt_run])
            qn = self.n.vectors.quantities(vectors[series_run], vectors[shunt_run])
            va[0, col], va[1, col] = modal_voltages(qp.va1, qn.va1)
            vb[0, col], vb[1, col] = modal_voltages(qp.vb1, qn.vb1)
            ib[0, col], ib[1, col] = modal_currents(qp.ib2, qn.ib2)

        def stack(m: np.ndarray) -> np.ndarray:
            return np.array([[np.asarray(m[r, c], dtype=complex) for c in range(2)] for r in range(2)])

        return PairQuantities(stack(va), stack(vb), stack(ib))


_SEVERAL_LOOPS = " loops through its load side "


def break_pair(netlist: Netlist, p: str, n: str, *, drivers: tuple[str | None, str | None] = (None, None),
               placements: tuple[Mapping[str, str] | None, Mapping[str, str] | None] = (None, None)) -> PairProbe:
    """Break nodes ``p`` and ``n`` together with a differential probe; the input is not modified.

    Each node is split exactly as ``break_loop`` splits it on its own: both splits are decided on
    the netlist as given (the first probe does not change the second node's decision), by the same
    rules (netloop.probe.sides); ``drivers`` and ``placements`` override them node by node, as
    ``driver=`` and ``placement=`` do for one node. Raises ProbeError for one node given twice, and
    whatever ``break_loop`` raises for either node (the message names the node).
    """
    first, second = p.strip().lower(), n.strip().lower()
    if not first or not second:
        raise ProbeError(f"a differential break needs two nodes P,N; got {p!r} and {n!r}")
    if first == second:
        raise ProbeError(f"a differential break needs two different nodes; got {first!r} twice")
    decided = []
    for node, driver, placement in zip((first, second), drivers, placements):
        try:
            decided.append(locate_split(netlist, node, driver=driver, placement=placement))
        except ProbeError as exc:
            raise ProbeError(f"cannot break the pair {first},{second} at {node}: {exc}") from exc
    half_p = break_loop(netlist, first, driver=drivers[0], placement=placements[0])
    try:
        _, check = split_loop(half_p.netlist, second, decided=decided[1])
        half_n = check()
    except ProbeError as exc:
        raise ProbeError(f"cannot break the pair {first},{second} at {second}: {exc}") from exc
    if half_n.side_a == half_p.side_b or half_n.side_b == half_p.side_b:
        raise ProbeError(f"nodes {first} and {second} are the same net; a differential break needs two nets")
    final = half_n.netlist
    half_p = replace(half_p, netlist=final)
    # break_loop warns when a node's load side closes several loops; at a pair those are the DM and
    # CM loops that the modal runs separate, so that warning is left out here (the others are kept)
    kept = [(first, w) for w in half_p.warnings if _SEVERAL_LOOPS not in w] + [(second, w) for w in half_n.warnings if _SEVERAL_LOOPS not in w]
    warnings = tuple(dict.fromkeys(f"{node}: {w}" for node, w in kept))
    return PairProbe(netlist=final, p=half_p, n=half_n, warnings=warnings)
