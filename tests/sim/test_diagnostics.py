"""ngspice's own diagnosis leads the message, its whole output is kept beside the deck, a recovery is not a failure."""

from __future__ import annotations

import re
import subprocess
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sim_decks import RECOVERS

from netloop.errors import SimulationError
from netloop.sim import AcRun, AcSweep, SimJob
from netloop.sim.diagnostics import diagnose, model_warnings

SWEEP = (AcSweep("dec", 2, 1.0, 1e3),)


def _job(netlist: str, op_voltages: bool = True, save: str = "v(a)") -> SimJob:
    return SimJob(netlist=netlist, runs=(AcRun("run", {"v1": 1.0}, SWEEP),), save=(save,), excitable=("v1",), op_voltages=op_voltages)


def _failure(simulator, netlist: str, op_voltages: bool) -> SimulationError:
    with pytest.raises(SimulationError) as info:
        simulator.run(_job(netlist, op_voltages))
    return info.value


FLOATING = "floating\nv1 a 0 dc 1 ac 1\nr1 a b 1k\nr2 b 0 1k\nc1 fl1 fl2 1p\nr3 fl1 fl2 1k\n"

CASES = [
    pytest.param("undefined\nv1 a 0 dc 1 ac 1\nr1 a b {rval}\nr2 b 0 1k\n",
                 "undefined parameter 'rval' (used in 'r1 a b {rval}')", "Undefined parameter [rval]", id="undefined-parameter"),
    pytest.param(FLOATING,
                 "singular matrix at node 'fl1': it has no DC path to ground", "check node fl1", id="floating-node"),
    pytest.param("parallel\nv1 a 0 dc 1 ac 1\nv2 a 0 dc 2\nr1 a 0 1k\n",
                 "singular matrix: the current of voltage source v1 is not determined; two ideal voltage sources in parallel",
                 "check node v1#branch", id="parallel-sources"),
    # each kind of element whose branch current ngspice names, as ngspice 39 names it for these decks
    pytest.param("parallel ccvs\nv1 s 0 dc 1 ac 1\nrs s 0 1k\nh1 a 0 v1 2\nh2 a 0 v1 3\nr1 a 0 1k\n",
                 "singular matrix: the current of current-controlled source h1 is not determined", "check node h1#branch",
                 id="parallel-ccvs"),
    pytest.param("parallel vcvs\nv1 s 0 dc 1 ac 1\nrs s 0 1k\ne1 a 0 s 0 2\ne2 a 0 s 0 3\nr1 a 0 1k\n",
                 "singular matrix: the current of voltage-controlled source e1 is not determined", "check node e1#branch",
                 id="parallel-vcvs"),
    pytest.param("no subcircuit\nv1 a 0 dc 1 ac 1\nr1 a b 1k\nx1 b 0 nosuch\n",
                 "unknown subcircuit in 'x1 b 0 nosuch': no .subckt of that name is defined or included", "unknown subckt: x1 b 0 nosuch",
                 id="unknown-subcircuit"),
    pytest.param("no model\nv1 a 0 dc 1 ac 1\nr1 a b 1k\nd1 b 0 nosuch\n",
                 "model 'nosuch' is not defined (used by 'd1 b 0 nosuch')", "can't find model 'nosuch'", id="undefined-model"),
    # a card ngspice refuses, named with its reason (before: only "Error on line 4 or its substitute:", a line of
    # netloop's own deck, and nothing of the card or the reason)
    pytest.param("unknown parameter\nv1 a 0 dc 1 ac 1\nr1 a b 1k\nr2 b 0 1k q=4\n",
                 "ngspice refused the line 'r2 b 0 1k q=4': unknown parameter (q)", "unknown parameter (q)", id="refused-card"),
    pytest.param("too few nodes\nv1 a 0 dc 1 ac 1\nr1 a b 1k\nm1 b a 0 nch\n.model nch nmos level=1\n",
                 "ngspice refused the line 'm1 b a 0 nch': not enough nodes", "not enough nodes", id="refused-card-nodes"),
    pytest.param("in a block\nv1 a 0 dc 1 ac 1\nr1 a b 1k\nx1 b blk\n.subckt blk p\nr2 p 0 1k q=4\n.ends\n",
                 "ngspice refused the line 'r.x1.r2 b 0 1k q=4': unknown parameter (q)", "unknown parameter (q)",
                 id="refused-card-in-a-subcircuit"),
    # a line ngspice cannot read at all (before: only "ngspice.dll cannot recover")
    pytest.param("brace\nv1 a 0 dc 1 ac 1\nr1 a b 1k\nr2 b 0 {1k\n",
                 "ngspice could not read the line 'r2 b 0 {1k': Closing \"}\" not found.", "Closing \"}\" not found.", id="unreadable-line"),
]


@pytest.mark.ngspice
@pytest.mark.parametrize("op_voltages", [True, False])
@pytest.mark.parametrize(("netlist", "lead", "ngspice_said"), CASES)
def test_ngspice_diagnosis_leads_the_message(simulator, netlist, lead, ngspice_said, op_voltages):
    """Each small deck fails with ngspice's own cause first (what ngspice 39 prints for it, found in the kept output),
    the deck and ngspice's whole output kept side by side, and no convergence advice for a structural fault."""
    error = _failure(simulator, netlist, op_voltages)
    assert error.message.startswith(lead), error.message
    assert "options that usually help" not in error.message  # no aid helps a floating node, parallel sources or a missing definition
    log = Path(error.log_path)
    assert log.parent == Path(error.deck_path).parent and ngspice_said in log.read_text()
    assert ngspice_said in error.simulator_output  # ngspice's own last lines travel with the error
    assert str(log) in str(error)


def _by_hand(tmp_path: Path, netlist: str) -> tuple:
    """diagnose() of ngspice -b's own output for ``netlist`` with an ac of its own (run by hand, no netloop in between)."""
    deck = tmp_path / "deck.cir"
    deck.write_text(netlist + ".control\nac dec 2 1 1k\n.endc\n.end\n")
    done = subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True, timeout=60, check=False)
    return diagnose((done.stdout + done.stderr).splitlines(), deck.read_text())


@pytest.mark.ngspice
def test_the_texts_match_ngspice_run_on_its_own(tmp_path):
    """diagnose() reads ngspice -b's own output of the same decks (run here by hand, no netloop in between) the same way."""
    for case in CASES:
        netlist, lead, _ = case.values
        found = _by_hand(tmp_path, netlist)
        assert found and found[0].text.startswith(lead) and found[0].structural


@pytest.mark.ngspice
def test_the_advice_for_a_floating_node_is_what_makes_ngspice_solve_it(simulator):
    """The floating node's diagnosis ends with what to do (a large resistor to ground), and doing just that makes the same
    deck solve: a 1 Gohm from fl1 to ground gives fl1 and fl2 the DC path ngspice found missing (v(fl1) = 0, no current)."""
    error = _failure(simulator, FLOATING, True)
    assert error.message.startswith("singular matrix at node 'fl1': it has no DC path to ground (a floating node, or one "
                                    "reached only through capacitors or current sources); give it one, e.g. a large "
                                    "resistor to ground;"), error.message
    result = simulator.run(_job(FLOATING + "rfix fl1 0 1g\n"))
    assert result.operating_point["fl1"] == pytest.approx(0.0, abs=1e-12)
    assert result.operating_point["b"] == pytest.approx(0.5, rel=1e-9)  # 1 V over 1k and 1k, closed form


UNRECOGNIZED = "unrecognized\nv1 a 0 dc 1 ac 1\nr1 a b 1k\nd1 b 0 dm\n.model dm d is=1e-14 cox=3\n"


@pytest.mark.ngspice
def test_an_ignored_model_parameter_is_a_warning(simulator):
    """A model parameter ngspice does not know ('unrecognized parameter (cox) - ignored', ngspice 39) is not an
    error; the result names it among its warnings."""
    result = simulator.run(_job(UNRECOGNIZED))
    assert result.warnings == ("ngspice ignored the unrecognized parameter 'cox' of model 'dm': check the model card "
                               "(or the level it selects)",)
    assert model_warnings("unrecognized parameter (cox) - ignored")  # without the .model line before it, still said




@pytest.mark.ngspice
@pytest.mark.parametrize("op_voltages", [True, False])
def test_an_error_line_ngspice_recovers_from_is_a_convergence_aid_not_a_failure(simulator, op_voltages, tmp_path):
    """The analysis finished and its vectors exist, so the job succeeds: v(f) equals what ngspice -b prints for the same
    deck, and the recovery is reported as the convergence aid (ngspice's 'Dynamic gmin stepping completed')."""
    result = simulator.run(_job(RECOVERS, op_voltages, save="v(f)"))
    assert "out of range for sqrt" in result.log
    assert result.convergence_aid == "ngspice: dynamic gmin stepping"
    deck = tmp_path / "by_hand.cir"
    deck.write_text(RECOVERS + ".control\nac dec 2 1 1k\nprint v(f)\n.endc\n.end\n")
    printed = subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True, timeout=60, check=False).stdout
    rows = [float(m.group(1)) for m in re.finditer(r"^\d+\s+\S+\s+(\S+),", printed, re.M)]
    assert len(rows) == 7
    got = result.runs[0].vectors["v(f)"]
    assert got.real.tolist() == pytest.approx(rows, rel=1e-5)  # ngspice prints 6 significant digits


@pytest.mark.ngspice
@pytest.mark.parametrize("op_voltages", [True, False])
def test_every_sweep_that_recovers_finishes_the_job(simulator, op_voltages):
    """ngspice finds the operating point again for each ac, recovering each time (sim_decks.RECOVERS): a job of two sweeps
    and two runs finishes, every point of every sweep there, and the recovery is its convergence aid."""
    sweeps = (AcSweep("dec", 2, 1.0, 1e3), AcSweep("lin", 3, 2e3, 4e3))
    job = SimJob(RECOVERS, runs=(AcRun("a", {"v1": 1.0}, sweeps), AcRun("b", {"v1": 2.0}, sweeps)), save=("v(f)",),
                 excitable=("v1",), op_voltages=op_voltages)
    result = simulator.run(job)
    assert [r.freq_hz.size for r in result.runs] == [10, 10]  # 7 of the dec sweep, 3 of the lin one
    np.testing.assert_allclose(result.runs[1].vectors["v(f)"], 2 * result.runs[0].vectors["v(f)"], rtol=1e-9)  # linear in v1's ac
    assert result.log.count("out of range for sqrt") >= 4
    assert result.convergence_aid == "ngspice: dynamic gmin stepping"


_FRAGMENTS = st.sampled_from(["unrecognized parameter (cox) - ignored", "UNRECOGNIZED parameter (vth0) - ignored", "unrecognized",
                              "unrecog", "nized", ".model dm d", "\u0130", "\u0131", "\u212a", "Note: ok", " ", "\n", "\r\n", "\r",
                              "\x0b", "\x0c", "\x1c", "\x85", "\u2028"])


@settings(max_examples=300, deadline=None)
@given(st.lists(_FRAGMENTS, max_size=12).map("".join))
def test_the_quick_look_at_a_whole_log_is_the_look_at_its_lines(log):
    """Whether a log may hold an ignored parameter is read from the text as it is, never from its lines joined again,
    with the same answer: line separators (any that str.splitlines knows) are no letters, so the word is found in one
    exactly when it is in the other, and the warnings are those of the lines read one by one."""
    lines = log.splitlines()
    joined = "\n".join(lines).lower()  # what the quick look read before
    assert ("unrecognized" in log.lower()) == ("unrecognized" in joined)
    by_line = any(re.search(r"unrecognized parameter \(([^)]+)\)\s*-\s*ignored", line, re.I) for line in lines)
    assert bool(model_warnings(log)) == (by_line and "unrecognized" in joined)


@pytest.mark.ngspice
def test_a_domain_error_names_the_element_ngspice_names(tmp_path):
    """ngspice -b's own output for sim_decks.RECOVERS ('Error: -0.0104898 out of range for sqrt', then 'in line b1', ngspice
    39) reads as a behavioural expression in b1 evaluated outside its domain, said once however often ngspice repeats it
    while it iterates, and not structural (ngspice recovers); without the 'in line' that follows it, no element is named."""
    found = [d for d in _by_hand(tmp_path, RECOVERS) if "domain" in d.text]
    assert [(d.text, d.structural) for d in found] == [
        ("a behavioural expression in b1 was evaluated outside its domain (sqrt of -0.0104898)", False)]
    (alone,) = diagnose(["Error: -2 out of range for log"])
    assert alone.text == "a behavioural expression was evaluated outside its domain (log of -2)"


@pytest.mark.ngspice
def test_a_long_output_travels_as_its_last_sixty_lines(simulator):
    """A netlist ngspice refuses at length (forty undefined parameters) fails with ngspice's last 60 lines beside the
    message, the end of the whole output kept in the log beside the deck, which sits in a folder of netloop's own when
    no keep_dir is given."""
    netlist = "many undefined\nv1 a 0 dc 1 ac 1\n" + "".join(f"r{i} a 0 {{p{i}}}\n" for i in range(40))
    with pytest.raises(SimulationError) as caught:
        simulator.run(_job(netlist))
    error = caught.value
    written = [line.rstrip() for line in Path(error.log_path).read_text().splitlines() if line.strip()]
    assert len(written) > 60 and error.simulator_output.splitlines() == written[-60:]
    assert Path(error.deck_path).parent.name.startswith("netloop-deck-")


@pytest.mark.ngspice
def test_an_inductor_loop_is_named_from_ngspice_s_own_words(tmp_path):
    """Two inductors in parallel (ngspice 39 -b: 'singular matrix:  check node l2#branch', then it recovers) read as the
    current of inductor l2 not determined; a model ngspice cannot find on its last line is named without a user."""
    found = _by_hand(tmp_path, "inductor loop\nv1 a 0 dc 1 ac 1\nr1 a b 1k\nl1 b 0 1u\nl2 b 0 2u\n")
    assert found and found[0].text.startswith("singular matrix: the current of inductor l2 is not determined") and found[0].structural
    (last,) = diagnose(["Error: can't find model 'nosuch'"])
    assert last.text == "model 'nosuch' is not defined: include its library or define the .model"
