"""What a break produces: the probed netlist and the vectors from which the two runs give va1, vb1, ia2, ib2."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from netloop.netlist.model import Netlist
from netloop.probe.sides import Bridge

__all__ = ["ProbeQuantities", "ProbeVectors", "ProbedNetlist"]


@dataclass(frozen=True, slots=True)
class ProbeQuantities:
    """The four probe quantities of Tian et al. (2001) / Middlebrook (1975), one value per frequency.

    Run 1 (series source AC 1 V, v_b - v_a = 1): ``va1``, ``vb1``. Run 2 (shunt source AC 1 A into a):
    ``ib2`` the current delivered from the probe into b, ``ia2 = ib2 - 1`` the current arriving from the driver.
    """

    va1: np.ndarray
    vb1: np.ndarray
    ia2: np.ndarray
    ib2: np.ndarray


def _pick(vectors: Mapping[str, np.ndarray], names: tuple[str, ...]) -> np.ndarray:
    lowered = {k.lower(): v for k, v in vectors.items()}
    for n in names:
        if n in lowered:
            return np.asarray(lowered[n], dtype=complex)
    raise KeyError(f"none of {', '.join(names)} among the vectors {', '.join(sorted(lowered))}")


@dataclass(frozen=True, slots=True)
class ProbeVectors:
    """The ngspice vectors to save and how va1, vb1, ia2, ib2 follow from them.

    ngspice's branch current of a V source flows from its + node through the source to its - node;
    the series source is written ``V b a`` (+ on the load side), so the current delivered into b is
    ``ib_sign * i(series)`` with ``ib_sign = -1``.
    """

    va: str  # "v(out_drive)": the driver side a
    vb: str  # "v(out)": the load side b
    i_series: str  # "i(vnl_series)": ngspice's branch current of the series source
    node_a: str  # the flattened node names, as ngspice names the vectors
    node_b: str
    branch: str  # "vnl_series#branch", the native vector name of the series current
    ib_sign: float = -1.0
    shunt_amps: float = 1.0  # AC current pushed into a in run 2
    series_volts: float = 1.0  # AC voltage v_b - v_a in run 1

    @property
    def save(self) -> tuple[str, ...]:
        """What to save in both runs, ngspice syntax."""
        return (self.va, self.vb, self.i_series)

    def quantities(self, series: Mapping[str, np.ndarray], shunt: Mapping[str, np.ndarray]) -> ProbeQuantities:
        """va1, vb1 from the series run and ib2, ia2 from the shunt run, normalised to unit excitation."""
        va1 = _pick(series, (self.va, self.node_a)) / self.series_volts
        vb1 = _pick(series, (self.vb, self.node_b)) / self.series_volts
        ib2 = self.ib_sign * _pick(shunt, (self.i_series, self.branch)) / self.shunt_amps
        return ProbeQuantities(va1, vb1, ib2 - 1.0, ib2)


@dataclass(frozen=True, slots=True)
class ProbedNetlist:
    """A NEW netlist with the node split and the probe in place, and everything about the break.

    The series source (v_b - v_a = v_s) joins the driver side a to the load side b; the shunt
    current source pushes current into a. Both are 0 V / 0 A at DC, so the operating point is the
    original one. Every other independent source has AC magnitude 0 (``silenced_sources``).
    """

    netlist: Netlist
    node: str  # as given, lower-case ("xamp.n5")
    side_a: str  # driver side, flattened ngspice name
    side_b: str  # load side, flattened ngspice name (keeps the node's own name)
    series_source: str  # flattened ngspice name, usable with alter ("vnl_series", "v.xamp.vnl_series")
    shunt_source: str
    vectors: ProbeVectors
    driver_terminals: tuple[str, ...]  # "m6.d", "cc.n", "xamp.out"
    load_terminals: tuple[str, ...]
    shunt_terminals: tuple[str, ...]  # connect the node only to AC ground; placed on the load side
    decided_by: str
    silenced_sources: tuple[str, ...]
    warnings: tuple[str, ...] = ()
    copied_subcircuits: tuple[tuple[str, str], ...] = ()  # (original, copy) for a break inside an instance
    bridges: tuple[Bridge, ...] = ()  # bridging elements at the node and the side each was put on, and why
    inputs_only: bool = False  # driver= named only inputs (gates, bases, control inputs) on the node
    outputs: tuple[str, ...] = ()  # the terminals on the node that drive it by the split rules ("m6.d")
    load_readers: tuple[str, ...] = ()  # no load terminal: the behavioural elements ("g1") whose expression reads the load side
    # when the netlist holds another split's probe too (netloop.probe.chain): every probe source of the netlist and every
    # vector either probe reads, in one order for both, so that both splits' jobs run on one loaded circuit
    circuit_sources: tuple[str, ...] = ()
    circuit_saves: tuple[str, ...] = ()

    @property
    def excitable(self) -> tuple[str, ...]:
        """Every probe source of the netlist (another probe's stays at AC 0 in both runs: it is then exactly transparent)."""
        return self.circuit_sources or (self.series_source, self.shunt_source)

    @property
    def saves(self) -> tuple[str, ...]:
        """The vectors to save in both runs (the same for every probe of a chained netlist)."""
        return self.circuit_saves or self.vectors.save

    @property
    def series_run_ac(self) -> Mapping[str, float]:
        """AC magnitudes of run 1 (series)."""
        return {self.series_source: self.vectors.series_volts, self.shunt_source: 0.0}

    @property
    def shunt_run_ac(self) -> Mapping[str, float]:
        """AC magnitudes of run 2 (shunt)."""
        return {self.series_source: 0.0, self.shunt_source: self.vectors.shunt_amps}
