"""A solved value written into a copy of the netlist: the right token, one instance only, the input untouched; a copy
for a knob's slopes probed as the loop was; and in ngspice the copy measures as the altered circuit does."""

from __future__ import annotations

from pathlib import Path

import pytest
from test_sensitivity_closed_form import MILLER, MILLER_DRIVER

from netloop.jobs.measure import load_netlist, measure, probe_job
from netloop.jobs.sensitivity import find_knobs, select_knobs
from netloop.jobs.sensitivity.edit import changed_netlist
from netloop.jobs.sensitivity.remeasure import Copies
from netloop.netlist import parse_text, write_netlist
from netloop.probe import split_loop

ROOT = Path(__file__).resolve().parents[3]

NETLIST = """edits
.param cc=1p
.subckt stage in out
rd out 0 10k
.ends
r1 a b 1.5k
c1 b 0 {cc}
c2 b 0 c=2p
m1 b a 0 0 nch w=4u l=1u
x1 a y stage
x2 a z stage
.model nch nmos level=1
.end
"""


def _knob(netlist, name):
    return select_knobs(find_knobs(netlist), [name])[0]


def test_values_are_scaled_where_the_card_writes_them():
    """A number is rewritten as a number, an expression as {(expr)*factor}, a key=value token keeps its key."""
    netlist = parse_text(NETLIST)
    cards = {name: changed_netlist(netlist, _knob(netlist, name), 2.0, 0.0)[1] for name in ("r1", "c1", "c2", "m1:w")}
    assert cards == {"r1": "r1 a b 3000.0", "c1": "c1 b 0 {(cc)*2.0}", "c2": "c2 b 0 c=4e-12", "m1:w": "m1 b a 0 0 nch w=8e-06 l=1u"}
    assert write_netlist(netlist) == write_netlist(parse_text(NETLIST))  # the input is not modified


def test_an_instance_gets_its_own_copy_of_the_definition():
    """Changing x1.rd copies the subcircuit for x1; x2 keeps the original definition and value."""
    netlist = parse_text(NETLIST)
    changed, card = changed_netlist(netlist, _knob(netlist, "x1.rd"), 0.5, 1e4)
    text = write_netlist(changed)
    assert card == "rd out 0 5000.0"
    assert ".subckt stage_changed_in_x1 in out" in text and "x1 a y stage_changed_in_x1" in text
    assert "x2 a z stage\n" in text and "rd out 0 10k" in text


def test_a_copy_is_probed_as_the_measured_loop_was():
    """A knob measured on edited copies (remeasure.Copies) gets the measured loop's own split: with driver= "g2,cc.n" the
    Miller capacitor stays on the driver side (Cc n1 out_drive), where the automatic split would put it on the load side;
    the copy differs from the measured loop's probe deck only by the .param line and the knob's card (the reference is
    the measured loop's deck, split_loop with the same driver, as the sensitivity job builds it). The job is called by
    the knob and its factor, as the what-if's re-measurements are (its status line, its kept deck's name)."""
    netlist = parse_text(MILLER)
    loop = probe_job(split_loop(netlist, "out", driver=MILLER_DRIVER)[0], ()).netlist.splitlines()
    assert "Cc n1 out 4e-13" in write_netlist(split_loop(netlist, "out")[0].netlist)  # the automatic split differs here
    job, vectors = Copies(netlist, "out", MILLER_DRIVER, 600.0).probed(_knob(netlist, "r2"), 1.5)
    copy = job.netlist.splitlines()
    assert copy[1] == ".param netloop_knob_scale=1.5" and copy[7] == "R2 out 0 {(100000.0)*netloop_knob_scale}"
    assert copy[:1] + copy[2:7] + copy[8:] == loop[:6] + loop[7:] and loop[6] == "R2 out 0 100000.0"
    assert "Cc n1 out_drive 4e-13" in copy and vectors == split_loop(netlist, "out", driver=MILLER_DRIVER)[0].vectors
    assert job.label == "r2 x1.5"


@pytest.mark.ngspice
def test_the_written_value_measures_as_the_altered_one():
    """The Miller buffer with cc written 1.3x larger measures the same phase margin as the sensitivity job's own
    whole measurement with cc altered 1.3x on the loaded circuit (ngspice solves both; they agree to 1e-9 deg)."""
    from netloop.jobs.measure import Sweep  # noqa: PLC0415
    from netloop.jobs.sensitivity.job import _Loop, _remeasure, _Remembering  # noqa: PLC0415 - the job's own pieces
    from netloop.sim import SharedLibrarySimulator  # noqa: PLC0415

    netlist = load_netlist(ROOT / "circuits" / "miller_buffer.cir")
    knob = _knob(netlist, "cc")
    with SharedLibrarySimulator() as sim:
        remembering = _Remembering(sim)
        loop = _Loop(netlist, "out", None, "tian", Sweep(), 0, 600.0)
        nominal = loop.measure(netlist, remembering, ())
        altered, loaded = _remeasure(loop, nominal, remembering.jobs).whole(sim, knob, 1.3)
        written = measure(changed_netlist(netlist, knob, 1.3, loaded[knob.alter(1.3).ref])[0], "out", simulator=sim)
    assert loaded == {"@cc[capacitance]": pytest.approx(1.2e-12)}
    assert written.analysis.margins.phase_margin_deg == pytest.approx(altered.margins.phase_margin_deg, abs=1e-9)
    assert altered.margins.phase_margin_deg > nominal.analysis.margins.phase_margin_deg + 3
