"""replace_elements: new cards for elements of one scope, inside an instance on a copy of each definition on its path."""

from __future__ import annotations

from dataclasses import replace

from netloop.netlist import parse_text, write_netlist
from netloop.probe import break_loop
from netloop.probe.rewrite import replace_elements
from netloop.probe.scope import elements_of, walk_scopes

# Invented: two channels of two stages each (as NESTED in test_nested.py), with a .param line inside stage; the model card is invented.
TEXT = """replace test
.model nch nmos level=1 vto=0.5 kp=20u lambda=0.05
.subckt channel in out vdd
.subckt stage in out vdd
.param rl=20k
Rd vdd n5 {rl}
M1 n5 in 0 0 nch w=10u l=1u
Rs n5 out 1k
.ends stage
xa in mid vdd stage
xb mid out vdd stage
.ends channel
Vdd vdd 0 dc 3.3
xc1 in o1 vdd channel
xc2 in o2 vdd channel
Rd in 0 5k
.end
"""

# The same netlist edited by hand: Rd of xc2.xa only is 30k; channel is copied for xc2 and stage for xc2.xa (each copy
# named after the original, the tag and the instance path), xc2 and the copy's xa point at the copies; xc1, xb, the
# top-level Rd and the original definitions are untouched.
EDITED = """replace test
.model nch nmos level=1 vto=0.5 kp=20u lambda=0.05
.subckt channel in out vdd
.subckt stage in out vdd
.param rl=20k
Rd vdd n5 {rl}
M1 n5 in 0 0 nch w=10u l=1u
Rs n5 out 1k
.ends stage
xa in mid vdd stage
xb mid out vdd stage
.ends channel
.subckt channel_changed_in_xc2 in out vdd
.subckt stage in out vdd
.param rl=20k
Rd vdd n5 {rl}
M1 n5 in 0 0 nch w=10u l=1u
Rs n5 out 1k
.ends stage
.subckt stage_changed_in_xc2_xa in out vdd
.param rl=20k
Rd vdd n5 30k
M1 n5 in 0 0 nch w=10u l=1u
Rs n5 out 1k
.ends stage_changed_in_xc2_xa
xa in mid vdd stage_changed_in_xc2_xa
xb mid out vdd stage
.ends channel_changed_in_xc2
Vdd vdd 0 dc 3.3
xc1 in o1 vdd channel
xc2 in o2 vdd channel_changed_in_xc2
Rd in 0 5k
.end
"""


def _rd_at(netlist, path):
    scope = next(s for s in walk_scopes(netlist, frozenset()) if s.path == path)
    rd = next(e for e in elements_of(netlist, scope) if e.key == "rd")
    return scope, replace(rd, tokens=(*rd.tokens[:2], "30k"))


def test_an_element_inside_one_instance_is_replaced_on_copies_of_its_path():
    """Rd inside xc2.xa gets its new card in copies of channel and stage; the written netlist equals the hand-edited one."""
    nl = parse_text(TEXT)
    scope, new = _rd_at(nl, ("xc2", "xa"))
    taken = {"channel", "stage"}
    r = replace_elements(nl.statements, scope, {"rd": new}, taken)
    assert r.copies == (("channel", "channel_changed_in_xc2"), ("stage", "stage_changed_in_xc2_xa"))
    assert taken == {"channel", "stage", "channel_changed_in_xc2", "stage_changed_in_xc2_xa"}  # the new names are taken now
    assert write_netlist(replace(nl, statements=r.statements, _index={})) == write_netlist(parse_text(EDITED))


def test_a_copy_name_already_taken_gets_a_number():
    """A copy whose name is taken (by another definition) is named with the next free number, and the X line follows it."""
    nl = parse_text(TEXT)
    scope, new = _rd_at(nl, ("xc2", "xa"))
    r = replace_elements(nl.statements, scope, {"rd": new}, {"channel", "stage", "channel_changed_in_xc2"})
    assert r.copies == (("channel", "channel_changed_in_xc2_2"), ("stage", "stage_changed_in_xc2_xa"))
    assert "xc2 in o2 vdd channel_changed_in_xc2_2" in write_netlist(replace(nl, statements=r.statements, _index={})).splitlines()


def test_a_top_level_element_is_replaced_in_place():
    """At the top level only the named card changes: no definition is copied, every other statement stays the same object."""
    nl = parse_text(TEXT)
    scope, new = _rd_at(nl, ())
    r = replace_elements(nl.statements, scope, {"rd": new}, {"channel", "stage"})
    assert r.copies == ()
    changed = [(a, b) for a, b in zip(nl.statements, r.statements, strict=True) if a is not b]
    assert changed == [(next(e for e in nl.elements if e.key == "rd"), new)]


def test_an_instance_with_a_parameter_before_its_subcircuit_name_points_at_the_copy():
    """An X line with key=value tokens between its nodes and its subcircuit name (as sky130's cells write) gets the copy's name in the name's place."""
    # By hand: only the subcircuit name changes on the X line; the parameter and the nodes stay where they were written.
    nl = parse_text(TEXT.replace("xc2 in o2 vdd channel", "xc2 in o2 vdd m=1 channel"))
    scope, new = _rd_at(nl, ("xc2", "xa"))
    r = replace_elements(nl.statements, scope, {"rd": new}, {"channel", "stage"})
    lines = write_netlist(replace(nl, statements=r.statements, _index={})).splitlines()
    assert "xc2 in o2 vdd m=1 channel_changed_in_xc2" in lines and "xc1 in o1 vdd channel" in lines


def test_three_levels_down_each_copy_points_at_the_next():
    """Replacing an element three instances down copies each definition on the path, and each copy's X line names the next copy."""
    # By hand: TEXT with channel wrapped in system (xk inside it) and xc2 a system: the path is xc2 (system), xk (channel), xa (stage).
    text = (TEXT.replace(".subckt channel in out vdd", ".subckt system in out vdd\n.subckt channel in out vdd")
            .replace(".ends channel\n", ".ends channel\nxk in out vdd channel\n.ends system\n").replace("xc2 in o2 vdd channel", "xc2 in o2 vdd system"))
    nl = parse_text(text)
    scope, new = _rd_at(nl, ("xc2", "xk", "xa"))
    r = replace_elements(nl.statements, scope, {"rd": new}, {"channel", "stage", "system"})
    assert r.copies == (("system", "system_changed_in_xc2"), ("channel", "channel_changed_in_xc2_xk"), ("stage", "stage_changed_in_xc2_xk_xa"))
    lines = write_netlist(replace(nl, statements=r.statements, _index={})).splitlines()
    for line in ("xc2 in o2 vdd system_changed_in_xc2", "xk in out vdd channel_changed_in_xc2_xk", "xa in mid vdd stage_changed_in_xc2_xk_xa",
                 "xc1 in o1 vdd channel"):
        assert line in lines
    assert lines.count("Rd vdd n5 30k") == 1 and lines.count("xk in out vdd channel") == 1  # the original system is untouched


def test_the_probe_stands_after_the_last_element_before_trailing_directives():
    """The probe's two sources are written right after the last element of the scope; directives after it stay, in order."""
    text = "probe placement (invented)\nE1 out 0 0 fb 100\nR1 out fb 1k\nR2 fb 0 1k\n.param k=1\n.model nch nmos level=1\n"
    lines = write_netlist(break_loop(parse_text(text), "out").netlist).splitlines()
    assert lines[3:8] == ["R2 fb 0 1k", "vnl_series out out_drive dc 0 ac 0", "inl_shunt 0 out_drive dc 0 ac 0", ".param k=1",
                          ".model nch nmos level=1"]


def test_a_copy_goes_into_the_definition_that_holds_its_original():
    """A stage defined in system beside channel (not inside it) gets its copy inside system's copy; a nested helper on the path stays."""
    # By hand: system holds stage and channel; channel holds an unrelated helper and instantiates stage (found in system).
    text = ("nesting (invented model)\n.model nch nmos level=1 vto=0.5 kp=20u lambda=0.05\n.subckt system in out vdd\n"
            ".subckt stage in out vdd\nRd vdd n5 20k\nM1 n5 in 0 0 nch w=10u l=1u\nRs n5 out 1k\n.ends stage\n"
            ".subckt channel in out vdd\n.subckt helper a\nRh a 0 1k\n.ends helper\nxa in mid vdd stage\nxh mid helper\nxb mid out vdd stage\n"
            ".ends channel\nxk in out vdd channel\n.ends system\nVdd vdd 0 dc 3.3\nxc2 in o2 vdd system\n")
    nl = parse_text(text)
    scope, new = _rd_at(nl, ("xc2", "xk", "xa"))
    r = replace_elements(nl.statements, scope, {"rd": new}, {"channel", "stage", "system", "helper"})
    lines = write_netlist(replace(nl, statements=r.statements, _index={})).splitlines()
    inside = lines[lines.index(".subckt system_changed_in_xc2 in out vdd"):lines.index(".ends system_changed_in_xc2")]
    assert ".subckt stage_changed_in_xc2_xk_xa in out vdd" in inside and "Rd vdd n5 30k" in inside
    assert "xa in mid vdd stage_changed_in_xc2_xk_xa" in inside and "xb mid out vdd stage" in inside and ".subckt helper a" in inside
