"""Included files and library sections as records: which statements each inclusion holds, which sections a library has."""

from __future__ import annotations

import pytest

from netloop.errors import NetlistError
from netloop.netlist import parse_file, write_netlist

# A library whose sections hold subcircuits (as process libraries do), with a statement outside every section.
LIBRARY = """* invented corner library
.subckt pre a b
R1 a b 1k
.ends pre
.lib tt
.subckt cell a b
R1 a b 2k
.ends cell
R5 x 0 5k
.endl tt
R6 y 0 6k
"""


def test_a_section_holds_its_subcircuits_and_nothing_after_its_endl(tmp_path):
    """`.lib FILE tt` reads every statement between `.lib tt` and `.endl tt`, past the `.ends` inside it, and nothing
    outside the section (ngspice manual, .lib: only the named section is read)."""
    (tmp_path / "c.lib").write_text(LIBRARY)
    top = tmp_path / "top.cir"
    top.write_text("t\n.lib c.lib tt\nX1 in out cell\n")
    nl = parse_file(top)
    assert [getattr(s, "name", None) for s in nl.statements] == ["cell", "R5", "X1"]
    assert nl.subcircuit("cell").pins == ("a", "b")


def test_subcircuit_ends_are_not_sections(tmp_path):
    """`.ends pre` (two words, like `.lib tt`) opens no section: asking for it is refused and the message lists only
    the real sections (ngspice manual, .lib: sections are opened by .lib NAME)."""
    (tmp_path / "c.lib").write_text(LIBRARY)
    top = tmp_path / "top.cir"
    top.write_text("t\n.lib c.lib pre\n")
    with pytest.raises(NetlistError) as info:
        parse_file(top)
    assert str(info.value).endswith(f"library {str(tmp_path / 'c.lib')!r} has no section 'pre' (sections: tt)")


def test_inclusions_hold_their_own_resolved_records(tmp_path):
    """An inclusion after other statements holds only the statements its file brought in, and they are the very records of the
    netlist even when reading resolved them later (an X card's pins from a definition further down); so the writer refers to
    the file again instead of inlining it (write_netlist's contract). An empty include before it changes nothing."""
    (tmp_path / "empty.inc").write_text("* nothing here\n")
    (tmp_path / "cell.inc").write_text("X1 a b amp\nR9 b 0 1k\n")
    top = tmp_path / "top.cir"
    top.write_text("t\nR0 a 0 1k\n.include empty.inc\n.include cell.inc\n.subckt amp in out\nR1 in out 1k\n.ends amp\n")
    nl = parse_file(top)
    empty, cell = nl.inclusions
    assert empty.statements == ()
    x1, r9 = cell.statements
    assert x1 is nl.statements[1] and r9 is nl.statements[2]
    assert x1.pins == ("in", "out")  # the definition's pin names, given after the include was read
    written = write_netlist(nl).splitlines()
    assert written[1:3] == ["R0 a 0 1k", f".include {tmp_path / 'cell.inc'}"]  # an include that brought nothing is not written


def test_an_include_that_leaves_a_definition_open_is_inlined(tmp_path):
    """A file that opens a .subckt which the including file closes is no self-contained inclusion: it has no record and the
    writer inlines it (ngspice reads an include as if its lines stood in place, so a definition may span the two files)."""
    (tmp_path / "head.inc").write_text(".subckt amp in out\nR1 in out 1k\n")
    top = tmp_path / "top.cir"
    top.write_text("t\n.include head.inc\nR2 in out 2k\n.ends amp\nX1 a b amp\n")
    nl = parse_file(top)
    assert nl.inclusions == ()
    assert [e.name for e in nl.subcircuit("amp").elements] == ["R1", "R2"]
    assert write_netlist(nl).splitlines()[1:5] == [".subckt amp in out", "R1 in out 1k", "R2 in out 2k", ".ends amp"]


def test_include_paths_with_spaces_are_written_quoted(tmp_path):
    """A referenced include in a folder whose name holds a space is written in quotes, so reading the written deck finds the
    same file and the same statements (a round trip; an unquoted path would end at the space)."""
    folder = tmp_path / "my parts"
    folder.mkdir()
    (folder / "p.inc").write_text("R2 b 0 2k\n")
    top = tmp_path / "top.cir"
    top.write_text('t\n.include "my parts/p.inc"\nR1 a b 1k\n')
    nl = parse_file(top)
    written = write_netlist(nl)
    assert f'.include "{folder / "p.inc"}"' in written.splitlines()
    again = tmp_path / "again.cir"
    again.write_text(written)
    assert [e.card() for e in parse_file(again).elements] == ["R2 b 0 2k", "R1 a b 1k"]


def test_one_character_quoted_include_path(tmp_path):
    """`.include "a"` names the file a: the closing quote is looked for from the character after the opening one."""
    (tmp_path / "a").write_text("R2 b 0 2k\n")
    top = tmp_path / "top.cir"
    top.write_text('t\n.include "a"\nR1 a b 1k\n')
    assert [i.path for i in parse_file(top).inclusions] == [str(tmp_path / "a")]
