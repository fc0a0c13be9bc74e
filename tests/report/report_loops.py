"""Helpers for the report tests: LoopResults built with analyse() on analytic loops (no ngspice)."""

from __future__ import annotations

import numpy as np

from netloop.analysis import analyse, parse_requirements
from netloop.jobs.loop_result import BreakInfo, LoopResult, SimInfo

W = 2 * np.pi
FREQ_HZ = np.logspace(0, 10, 201)


def two_stage(f):
    """A two-stage amplifier's loop: A0 = 1e4 with poles at 1 kHz, 30 MHz and 100 MHz (stable, PM about 67 deg)."""
    s = 1j * W * np.asarray(f)
    return 1e4 / ((1 + s / (W * 1e3)) * (1 + s / (W * 3e7)) * (1 + s / (W * 1e8)))


def conditional(f):
    """A conditionally stable loop: a triple pole at 10 Hz, a double zero at 1 kHz, poles at 1 MHz and 10 MHz."""
    s = 1j * W * np.asarray(f)
    return 1e8 * (1 + s / (W * 1e3)) ** 2 / ((1 + s / (W * 10)) ** 3 * (1 + s / (W * 1e6)) * (1 + s / (W * 1e7)))


def unstable(f):
    """A three-pole loop with too much gain: A0 = 1e4, poles at 1 kHz, 1 MHz and 2 MHz (unstable)."""
    s = 1j * W * np.asarray(f)
    return 1e4 / ((1 + s / (W * 1e3)) * (1 + s / (W * 1e6)) * (1 + s / (W * 2e6)))


def marginal(f):
    """A three-pole loop short of common practice: A0 = 1e3, poles at 1 kHz, 1 MHz and 2 MHz (PM 32.7 deg, GM 9.56 dB)."""
    s = 1j * W * np.asarray(f)
    return 1e3 / ((1 + s / (W * 1e3)) * (1 + s / (W * 1e6)) * (1 + s / (W * 2e6)))


def quiet(f):
    """A loop that never reaches 0 dB: 0.1 / (1 + s / 1 kHz)."""
    s = 1j * W * np.asarray(f)
    return 0.1 / (1 + s / (W * 1e3))


def make_result(
    loop,
    *,
    netlist: str = "circuits/front_end.cir",
    node: str = "xamp.n5",
    label: str = "",
    requirements: tuple[str, ...] = (),
    ignored: tuple[str, ...] = (),
    freq_hz=FREQ_HZ,
) -> LoopResult:
    """A LoopResult for the analytic loop, as measure() would assemble it."""
    f = np.asarray(freq_hz, dtype=float)
    analysis = analyse(f, loop(f))
    reqs = tuple(r.check(analysis) for r in parse_requirements(requirements))
    breaks = BreakInfo(
        node=node,
        side_a=f"{node}__a",
        side_b=f"{node}__b",
        driver_terminals=("xamp.m6.d",),
        load_terminals=("xamp.m1.g", "cc.1"),
        shunt_terminals=(),
        decided_by="the only terminal that is a transistor drain drives the node",
        silenced_sources=("vin",),
    )
    sim = SimInfo(backend="analytic", points=int(f.size), refinement_rounds=0, refined=True, convergence_aid=None, deck_path=None, seconds=0.01)
    return LoopResult(
        netlist=netlist,
        label=label,
        method="tian",
        breaks=breaks,
        analysis=analysis,
        requirements=reqs,
        ignored_statements=ignored,
        warnings=analysis.warnings,
        sim=sim,
    )
