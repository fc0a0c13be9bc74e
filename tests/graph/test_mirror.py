"""Mirror-image nets of fully differential circuits (netloop.graph.mirror), against the circuits' own wiring read by hand."""

from __future__ import annotations

from pathlib import Path

import pytest

from netloop.graph import flatten
from netloop.graph.mirror import mirror_pairs
from netloop.netlist import parse_file, parse_text

CIRCUITS = Path(__file__).resolve().parent.parent.parent / "circuits"

# An invented fully differential stage (level-1 cards, for demos only): a pair with resistor loads, resistive feedback
# from each output to the other side's input, and a common-mode loop through the sense resistors and m5's gate.
_FD = """fd stage (invented)
.model nch nmos level=1 vto=0.5 kp=100u
Vdd vdd 0 1.8
Vip ip 0 dc 0.9 ac 1
Vin in 0 dc 0.9 ac 1 180
Rip ip xp 10k
Rin in xn 10k
M1 outn xp tail 0 nch w=10u l=1u
M2 outp xn tail 0 nch w=10u l=1u
R1 vdd outn 20k
R2 outp vdd 20k
Rfp outp xp 20k
Rfn xn outn 20k
Rs1 outp cm 100k
Rs2 cm outn 100k
M5 tail cm 0 0 nch w=4u l=1u
.end
"""


def _pairs(text: str, nets: list[str]):
    return mirror_pairs(flatten(parse_text(text)), nets)


def test_the_halves_of_a_fully_differential_stage_are_mirror_images():
    """outp/outn and xp/xn swap under the stage's symmetry, which keeps tail and cm: mirror pairs, in the order the nets
    are given; R2, Rfn and Rs2 are written the other way round from their partners, which a resistor does not mind."""
    nets = ["cm", "outn", "outp", "xp", "xn", "tail"]
    assert _pairs(_FD, nets) == (("outn", "outp"), ("xp", "xn"))
    assert _pairs(_FD, ["xn", "outp", "xp", "outn", "tail"]) == (("xn", "xp"), ("outp", "outn"))


def test_a_mismatched_half_has_no_mirror():
    """One load 10 % larger: no symmetry swaps the outputs (nor anything their difference reaches)."""
    assert _pairs(_FD.replace("R2 outp vdd 20k", "R2 outp vdd 22k"), ["cm", "outn", "outp", "xp", "xn", "tail"]) == ()


def test_a_pair_needs_a_net_of_the_loops_its_symmetry_keeps():
    """A ring of four inverting stages, two kinds taking turns: turning it by two stages swaps n1 and n3 (and n2 and n4),
    but keeps no net of the loop in place, so it is no differential pair (a break measures the one ring loop)."""
    stages = "".join(f"G{k} 0 n{k % 4 + 1} n{k} 0 1m\nR{k} n{k % 4 + 1} 0 {10 * (1 + k % 2)}k\nC{k} n{k % 4 + 1} 0 1p\n"
                     for k in range(1, 5))
    assert _pairs(f"ring (invented)\n{stages}.end\n", ["n1", "n2", "n3", "n4"]) == ()


@pytest.mark.parametrize("name", ["miller_buffer.cir", "ldo.cir", "testbench/bandgap_bjt.cir", "benches/bandgap_reg.cir"])
def test_single_ended_circuits_have_no_mirror_pairs(name):
    """The bundled single-ended circuits (a bandgap's branches of area 1 and 8 included) have none among their nets."""
    circuit = flatten(parse_file(CIRCUITS / name))
    assert mirror_pairs(circuit, list(circuit.nets)) == ()


@pytest.mark.parametrize(("name", "first"), [("fd_amp_cmfb.cir", ("outn", "outp")), ("benches/fc_ota_cmfb.cir", ("outn", "outp")),
                                             ("testbench/fd_cmfb_hier.cir", ("vout<0>", "vout<1>"))])
def test_the_bundled_fully_differential_circuits_pair_their_outputs(name, first):
    """Each bundled FD circuit's outputs are a mirror pair (its header and wiring, read by hand)."""
    circuit = flatten(parse_file(CIRCUITS / name))
    nets = sorted(circuit.nets)
    pairs = mirror_pairs(circuit, [*first, *nets])
    assert pairs[0] == first


def test_inputs_driven_through_opposite_gains_leave_the_halves_mirror_images():
    """A testbench that drives the inputs from one source through E sources of gain +0.5 and -0.5 about a common mode:
    those elements touch no net of the loops (ip and in lead into the stage through Rip and Rin), so their values are not
    part of the symmetry, and the outputs stay a pair; a gain differing inside the loops still breaks it (above)."""
    driven = _FD.replace("Vip ip 0 dc 0.9 ac 1\nVin in 0 dc 0.9 ac 1 180\n",
                         "Vcm cmi 0 dc 0.9\nVd d 0 dc 0 ac 1\nEip ip cmi d 0 0.5\nEin in cmi d 0 -0.5\n")
    assert "Eip" in driven
    nets = ["cm", "outn", "outp", "xp", "xn", "tail"]
    assert _pairs(driven, nets) == (("outn", "outp"), ("xp", "xn"))
    assert _pairs(driven.replace("R2 outp vdd 20k", "R2 outp vdd 22k"), nets) == ()
