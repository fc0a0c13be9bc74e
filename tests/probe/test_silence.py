"""Silencing stray AC sources: the AC part of each independent source's card set to 0, everything else kept as written."""

from __future__ import annotations

from dataclasses import replace

import pytest

from netloop.netlist import parse_file, parse_text, write_netlist
from netloop.probe.silence import silence_element, silence_statements


def _card(line: str):
    (e,) = parse_text("t\n" + line + "\n.end\n").elements
    return e


# Expected cards written by hand from ngspice's independent source syntax (ngspice manual, "Independent Sources"):
# DC/TRAN VALUE, AC [ACMAG [ACPHASE]] (ACMAG 1 when left out), then a transient function; keywords in any case.
@pytest.mark.parametrize("line, silenced", [
    ("V1 a 0 dc 1 ac 1", "V1 a 0 dc 1 ac 0"),
    ("V1 a 0 DC 1 AC 2 45", "V1 a 0 DC 1 ac 0"),  # the phase goes with the magnitude
    ("V1 a 0 dc 1 ac 1m sin(0 1 1k)", "V1 a 0 dc 1 ac 0 sin(0 1 1k)"),  # the transient function stays
    ("V1 a 0 ac .5 -90", "V1 a 0 ac 0"),
    ("V1 a 0 ac -1e-3", "V1 a 0 ac 0"),
    ("V1 a 0 ac {amp} {ph}", "V1 a 0 ac 0"),  # parameter expressions are values too
    ("V1 a 0 ac 'amp*2' 0", "V1 a 0 ac 0"),
    ("V1 a 0 dc 1 ac", "V1 a 0 dc 1 ac 0"),  # "ac" alone is magnitude 1
    ("V1 a 0 ac dc 1", "V1 a 0 ac 0 dc 1"),
    ("I1 0 a ac=1", "I1 0 a ac=0"),
    ("I1 0 a dc 1u AC=2", "I1 0 a dc 1u ac=0"),
    ("V1 a 0 dc 1 ac 0", None),  # already silent: nothing to change
    ("V1 a 0 dc 1 ac 0.0 90", None),
    ("V1 a 0 dc 1 ac 0e3", None),
    ("I1 0 a ac=0", None),
    ("V1 ac 0 dc 1", None),  # a node named ac is no AC part
    ("V1 ac b dc 1", None),
    ("V1 a 0 ac 1 90 sin(0 1 1k)", "V1 a 0 ac 0 sin(0 1 1k)"),  # magnitude and phase go, the function stays whole
    ("V1 a 0 dc 1", None),
    ("R1 a ac 1k", None),  # only independent sources are silenced
    ("E1 a 0 ac 0 2", None),
    ("Xs a 0 sub ac=1", None),  # an instance parameter named ac is no source
])
def test_the_ac_part_of_a_source_card_is_set_to_zero(line, silenced):
    """Each form of an AC specification becomes 'ac 0' (or ac=0) in place; a card with no AC part, or AC 0, is left alone (None)."""
    new = silence_element(_card(line))
    assert (new.card() if new is not None else None) == silenced


NESTED = """nested sources
.subckt outer b
.subckt inner a
Vi a 0 dc 1 ac 1
Ri a 0 1k
.ends inner
Vo b 0 ac 2
Xin b inner
.ends outer
.param amp=1
vtop t 0 dc 0 ac {amp}
Vkeep k 0 ac 1
Vquiet q 0 dc 1
X1 t outer
"""


def test_sources_in_nested_definitions_are_silenced_and_reported_by_their_definition():
    """Every level is silenced; the hits name the definition holding each source ('' at the top); keep spares top-level sources only."""
    nl = parse_text(NESTED)
    statements, hits = silence_statements(nl.statements, frozenset({"vkeep", "vi"}))
    assert hits == (("inner", "vi"), ("outer", "vo"), ("", "vtop"))  # in statement order; vi is kept only at the top, where it is not
    text = write_netlist(replace(nl, statements=statements, _index={}))
    for card in ("Vi a 0 dc 1 ac 0", "Vo b 0 ac 0", ".param amp=1", "vtop t 0 dc 0 ac 0", "Vkeep k 0 ac 1", "Vquiet q 0 dc 1", "Ri a 0 1k"):
        assert card in text.splitlines()
    _, again = silence_statements(statements, frozenset())  # silencing again finds only the source kept the first time
    assert again == (("", "vkeep"),)


def test_an_included_file_with_nothing_to_silence_is_still_written_as_its_include(tmp_path):
    """Definitions with no source to silence stay the very same records, so the written deck still refers to the included file."""
    # Reference: write_netlist's docstring (netloop/netlist/writer.py): an .include is written again as that statement when every
    # statement it brought in still stands unchanged as the very same record.
    (tmp_path / "blocks.inc").write_text(".subckt buf a b\nE1 b 0 a 0 1\n.ends buf\n")
    (tmp_path / "top.cir").write_text("top\n.include blocks.inc\nVin in 0 dc 0 ac 1\nX1 in out buf\nR1 out 0 1k\n.end\n")
    nl = parse_file(tmp_path / "top.cir")
    statements, hits = silence_statements(nl.statements, frozenset())
    assert hits == (("", "vin"),)
    lines = write_netlist(replace(nl, statements=statements, _index={})).splitlines()
    assert any(line.startswith(".include") and "blocks.inc" in line for line in lines) and ".subckt buf a b" not in lines
