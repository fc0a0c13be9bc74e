"""One knob's slopes when a simulation fails part of the way (no slope, the failure said, the values read kept), and the
value of a knob measured on edited copies (stand-in measurements, no simulator: the failure is ngspice's SimulationError
as the simulators raise it)."""

from __future__ import annotations

import pytest

from netloop.analysis.local import LocalReading
from netloop.errors import SimulationError
from netloop.jobs.sensitivity import find_knobs
from netloop.jobs.sensitivity.records import STEPS, Slope
from netloop.jobs.sensitivity.remeasure import Reading
from netloop.jobs.sensitivity.slopes import knob_slopes
from netloop.netlist import parse_text

C1 = 2e-12


class _FailsAtThirdValue:
    """Measures the loop (a fixed reading) and reports C1 as loaded, as ngspice does, at x e^h and x e^-h; at x e^2h the
    simulation fails."""

    def __init__(self):
        self.scales: list[float] = []

    def read(self, simulator, knob, scale):
        self.scales.append(scale)
        if len(self.scales) == 3:
            raise SimulationError("'ac lin 11 1e5 1e6' failed: singular matrix", corner=f"{knob.name} x{scale:.6g}")
        return Reading(LocalReading(50.0 + scale, 1e6, None, None, 1.0), False, {knob.alter(scale).ref: C1})


def test_a_failed_simulation_gives_no_slope_and_says_why():
    """The third of the four values fails: every slope is None, ``problem`` carries ngspice's message (records.Sensitivity:
    "why no slope was found"; docs/sensitivity-json.md: a simulation failed at one of its values), ``value`` is C1 as read
    before the failure, and the two values measured are kept as probes."""
    knob = find_knobs(parse_text("one capacitor\nc1 a 0 2p\nr1 a 0 1k\n.end\n"))[0]
    remeasure = _FailsAtThirdValue()
    s = knob_slopes(remeasure, None, knob, 0.01)
    assert len(remeasure.scales) == 3  # stopped at the failure: x e^2h is not measured again, x e^-2h not at all
    assert s.problem == "the simulation failed: 'ac lin 11 1e5 1e6' failed: singular matrix"
    assert all(s.slope(f) == Slope(None, None) for f in ("pm", "gm", "fc", "peak"))
    assert s.value == C1
    assert [p.scale for p in s.probes] == remeasure.scales[:2] and len(STEPS) == 4


def test_a_knob_read_from_an_edited_copy_has_the_value_its_card_writes():
    """A wrapper's width is measured on edited copies, which change no loaded value and so report none (no Alter: the
    readings' loaded maps are empty); its value is the card's, w=2 at .option scale=1u: 2e-6 m (Knob.written, by hand)."""
    netlist = parse_text("wrapped\n.subckt nwrap d g s b\n.param l=1 w=1\nmdev d g s b nmod l={l} w={w}\n"
                         ".model nmod nmos level=1\n.ends\n.option scale=1u\nxm1 d g 0 0 nwrap w=2 l=0.5\nrd d 0 1k\n.end\n")
    knob = next(k for k in find_knobs(netlist) if k.name == "xm1:w")

    class _Copies:
        def read(self, simulator, knob, scale):
            return Reading(LocalReading(50.0 + scale, 1e6, None, None, 1.0), False, {})

    s = knob_slopes(_Copies(), None, knob, 0.01)
    assert not knob.in_place and s.problem is None and s.value == pytest.approx(2e-6, rel=1e-12)
