"""Judging ngspice output lines, and vector spellings."""

from __future__ import annotations

from hypothesis import given, settings
from hypothesis import strategies as st

from netloop.sim.output import _AC_OP_FAILED, _ERROR, _OP_FAILED, _quiet, error_lines, ngspice_fallback, op_failed, recovery
from netloop.sim.vectors import canonical, unknown_saves

# Lines printed by ngspice 39 on this machine for a circuit that recovers through gmin stepping
# (tests/sim/test_convergence.py's CUBIC) and for one whose operating point fails (sim_decks.NO_SOLUTION).
RECOVERED = [
    "Doing analysis at TEMP = 27.000000 and TNOM = 27.000000",
    "Warning: singular matrix:  check node n",
    "Note: Starting dynamic gmin stepping",
    "Trying gmin =   1.0000E-03 Note: One successful gmin step",
    "Warning: Dynamic gmin stepping failed",
    "Note: Starting true gmin stepping",
    "Warning: True gmin stepping failed",
    "Note: Starting source stepping",
    "Note: Transient op started",
    "Note: Transient op finished successfully",
    "No. of Data Rows : 1",
]
FAILED = [
    "Note: Transient op started",
    "Error: Transient op failed, timestep too small",
    "DC solution failed -",
    'doAnalyses: OP:  Timestep too small; trouble with node "n"',
    "op simulation(s) aborted",
]


def test_notes_and_warnings_are_not_errors():
    """Gmin-stepping notes and recovered warnings are no failure; a failed op is one, and says it is the op."""
    assert error_lines(RECOVERED) == ()
    assert not op_failed(RECOVERED)
    assert error_lines(FAILED) == tuple(FAILED[1:])
    assert op_failed(FAILED)
    assert not op_failed(["Error: no such device or model name vnope"])
    assert ngspice_fallback(RECOVERED) == "ngspice: transient operating point"
    assert ngspice_fallback(["Note: Starting dynamic gmin stepping", "Note: Dynamic gmin stepping completed"]) == "ngspice: dynamic gmin stepping"
    assert ngspice_fallback(["No. of Data Rows : 1"]) is None


def test_a_message_quotes_the_last_twelve_lines_written():
    """tail(): the last 12 non-blank lines by default, each without trailing blanks, in order."""
    from netloop.sim.output import tail  # noqa: PLC0415

    lines = [f"line {i}  " if i % 3 else "" for i in range(40)]
    kept = [f"line {i}" for i in range(40) if i % 3]
    assert tail(lines) == "\n".join(kept[-12:])
    assert tail(lines, 2) == "\n".join(kept[-2:])


def test_a_recovery_is_named_by_its_fallback_or_its_first_error():
    """What ngspice recovered through: its fallback when it names one, else the first error line it printed; None when it
    printed neither."""
    assert recovery(RECOVERED) == "ngspice: transient operating point"
    assert recovery(FAILED) == f"ngspice: recovered after '{FAILED[1]}'"  # the first of its two error lines
    assert recovery(["Error: -0.01 out of range for sqrt", "Error: -0.02 out of range for sqrt"]) == (
        "ngspice: recovered after 'Error: -0.01 out of range for sqrt'")
    assert recovery(["Note: Starting dynamic gmin stepping"]) is None
    assert recovery([]) is None


def test_vector_spellings():
    """Nodes and branches compare equal however ngspice or the user spells them."""
    assert canonical("OUT") == canonical("v(out)") == "v(out)"
    assert canonical("V1#branch") == canonical("i(v1)") == "i(v1)"
    assert canonical("xamp.n5") == "v(xamp.n5)"
    assert unknown_saves(["v(out)", "i(v1)", "@m1[gm]"], ["out", "v1#branch"]) is None
    assert unknown_saves(["v(out,in)"], ["out", "in"]) is None  # a two-node form names no single vector of the op: not judged here
    message = unknown_saves(["v(outt)"], ["out", "in"])
    assert "'v(outt)'" in message and "v(out)" in message
    assert unknown_saves(["v(zzz)"], ["out", "in"]) == "the circuit has no vector 'v(zzz)'"  # no name close to it
    assert unknown_saves(["v(outt)", "i(v9)"], ["out", "in", "v1#branch"]) == (
        "the circuit has no vector 'v(outt)' (did you mean v(out)?), 'i(v9)' (did you mean i(v1)?)")


@settings(max_examples=150, deadline=None)
@given(st.sampled_from([_ERROR, _OP_FAILED, _AC_OP_FAILED]).flatmap(
    lambda pattern: st.from_regex(pattern, alphabet=st.characters(max_codepoint=127)).map(lambda line: (pattern, line))))
def test_a_line_a_pattern_matches_is_never_passed_over(case):
    """The substring check that spares ngspice's usual output the patterns (output._quiet) never passes over a line one
    of them matches: lines made from the patterns themselves (hypothesis from_regex), ASCII as ngspice prints."""
    pattern, line = case
    assert pattern.search(line)
    assert not _quiet([line]) and not _quiet(["Note: One successful gmin step", line, ""])


def test_the_usual_iteration_notes_are_quiet():
    """ngspice's notes while it steps gmin to an operating point (RECOVERED, less its warnings) need no pattern."""
    assert _quiet([line for line in RECOVERED if "Warning" not in line])
    assert not _quiet(RECOVERED) and not _quiet(["Fehler: ÄC operating point failed"])  # non-ASCII: the patterns decide


def test_output_given_as_any_iterable_is_judged_as_a_list():
    """The judging functions take ngspice's lines as a list, a tuple or a one-pass iterator alike."""
    assert error_lines(iter(FAILED)) == error_lines(FAILED) == error_lines(tuple(FAILED))
    assert op_failed(iter(FAILED)) and not op_failed(iter(RECOVERED))
