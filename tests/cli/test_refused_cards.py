"""A card ngspice refuses (a typo the netlist reader lets through) is one error line at that card's file:line, exit 2."""

from __future__ import annotations

from pathlib import Path

import pytest

from netloop.cli.main import main

pytestmark = pytest.mark.ngspice

# An invented fully differential loop: two inverting halves (a block), each fed back by Rf/Rg, and a level-1 NMOS
# load on one output (so a MOSFET card can be written wrong too); the typo of each case goes into the marked line.
LOOP = """refused cards (invented)
.param rf=10k
.subckt half i o
E1 x 0 i 0 -1000
R1 x o 1k
C1 o 0 1n
.ends
X1 ip op half
X2 in on half
Rf1 op ip {rf}
Rg1 ip 0 10k
Rf2 on in {rf}
Rg2 in 0 10k
Vb b 0 dc 1
M1 op b 0 0 nch w=1u l=10u
.model nch nmos level=1 vto=0.5 kp=50u
.end
"""

# (the line as written, the same line with a typo a designer makes); ngspice refuses each, the reader does not
TYPOS = {
    "parameter-in-a-block": ("R1 x o 1k", "R1 x o 1k q=4"),  # ngspice: Error on line: / r.x1.r1 ... / unknown parameter (q)
    "too-few-nodes": ("M1 op b 0 0 nch w=1u l=10u", "M1 op b 0 nch w=1u l=10u"),  # not enough nodes
    "unbalanced-brace": ("Rf1 op ip {rf}", "Rf1 op ip {rf"),  # Closing "}" not found.
    "param-line": (".param rf=10k", ".param rf=10k.0k"),  # Misplaced operator (then rf undefined where it is used)
}
COMMANDS = {
    "check": ["check", "{path}"],
    "check-at": ["check", "{path}", "--at", "op"],
    "check-pair": ["check", "{path}", "--at-pair", "op,on"],
    "compare": ["compare", "{path}", "--at", "op", "--at", "ip"],
}


@pytest.mark.parametrize("command", sorted(COMMANDS))
@pytest.mark.parametrize("typo", sorted(TYPOS))
def test_a_refused_card_is_one_error_line_at_its_file_line(typo, command, tmp_path, capsys):
    """Before, ngspice's complaint reached the user as 'Error on line 8 or its substitute:' (a line of netloop's own deck)
    or only 'ngspice.dll cannot recover': nothing said which line of the netlist to fix. Now the one error line starts
    with the file:line of the card ngspice named (ngspice 39's output read by netloop.sim.diagnostics), exit 2."""
    good, bad = TYPOS[typo]
    assert LOOP.count(good + "\n") == 1
    path = tmp_path / "loop.cir"
    path.write_text(LOOP.replace(good + "\n", bad + "\n"))
    line = LOOP.splitlines().index(good) + 1
    assert main([a.format(path=path) for a in COMMANDS[command]]) == 2
    err = capsys.readouterr().err
    errors = [e for e in err.splitlines() if e.startswith("netloop: error:")]
    assert len(errors) == 1 and f"{path}:{line}:1: " in errors[0], err
    assert "Traceback" not in err


def test_the_loop_without_a_typo_is_measured(tmp_path, capsys):
    """The same netlist as written runs (so each case above fails by its typo alone)."""
    path = tmp_path / "loop.cir"
    path.write_text(LOOP)
    assert main(["check", str(path), "--at", "op"]) == 0, capsys.readouterr()
