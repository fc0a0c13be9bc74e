"""A loop document read back into its LoopResult gives the same document again, field for field."""

from __future__ import annotations

import json
import math
from dataclasses import replace

import numpy as np
import pytest

from netloop.analysis import analyse, parse_requirements
from netloop.analysis.results import PhaseCrossover
from netloop.errors import ResultsError
from netloop.jobs.discover import GroupResult, LoopsCheck, take_census
from netloop.jobs.document import groups_document, multi_document, to_document
from netloop.jobs.document_read import result_from_document
from netloop.jobs.loop_result import BreakInfo, LoopResult, SimInfo
from netloop.report.bode_plot import bode_figure

W = 2 * np.pi
F = np.logspace(0, 10, 241)


def _s(f):
    return 1j * W * np.asarray(f)


LOOPS = {
    "two-stage": lambda f: 1e4 / ((1 + _s(f) / (W * 1e3)) * (1 + _s(f) / (W * 3e7)) * (1 + _s(f) / (W * 1e8))),
    "conditional": lambda f: 1e8 * (1 + _s(f) / (W * 1e3)) ** 2 / ((1 + _s(f) / (W * 10)) ** 3 * (1 + _s(f) / (W * 1e6)) * (1 + _s(f) / (W * 1e7))),
    "unstable": lambda f: 1e4 / ((1 + _s(f) / (W * 1e3)) * (1 + _s(f) / (W * 1e6)) * (1 + _s(f) / (W * 2e6))),
    "no-phase-crossover": lambda f: 1e3 / (1 + _s(f) / (W * 1e3)),
    "does-not-regulate": lambda f: 0.1 / (1 + _s(f) / (W * 1e3)),
    "band-pass": lambda f: 100 * (_s(f) / (W * 10)) / ((1 + _s(f) / (W * 10)) * (1 + _s(f) / (W * 1e5))),
    # T = (w0/s)^2 equals -1 at 1 kHz, a sample: the closed loop has poles on the imaginary axis, so no pole fit is made
    # (netloop.analysis.poles: "T equals -1 at a sample") and closed_loop_poles is written unfitted.
    "double-integrator": lambda f: (W * 1e3 / _s(f)) ** 2,
}


def _result(name: str) -> LoopResult:
    a = analyse(F, LOOPS[name](F))
    reqs = tuple(r.check(a) for r in parse_requirements(["pm>=45", "gm>=10", "fc>1k", "peak<=3"]))
    return LoopResult("x.cir", name, "tian", BreakInfo("out", "out_drive", "out", ("m6.d",), ("m1.g",), (), "why", ("vin",), (("a", "a_1"),)),
                      a, reqs, ("x.cir:3: .tran 1n 1u",), ("a warning",), SimInfo("analytic", F.size, 1, True, None, None, 0.25, 2),
                      caveats=("x.cir:1: the title line reads as an element",),
                      library_warnings=("lib.sub:4: model nch is never used",))


@pytest.mark.parametrize("name", sorted(LOOPS))
def test_round_trip_gives_the_same_document(name):
    """to_document(result_from_document(d)) == d, through JSON text, for loops with every kind of crossover, infinite
    figures (a gain margin with no phase crossover), none (a loop that does not regulate) and no pole fit."""
    doc = json.loads(json.dumps(to_document(_result(name)), allow_nan=False))
    again = result_from_document(doc)
    assert to_document(again) == doc
    # Reference: netloop.jobs.document_read's docstring (every field of the record is in the document).
    assert (again.caveats, again.library_warnings) == (_result(name).caveats, _result(name).library_warnings)
    assert again.verdict == doc["verdict"] and again.analysis.classification == doc["classification"]
    np.testing.assert_array_equal(again.analysis.t, _result(name).analysis.t)


def test_a_read_back_loop_draws_its_bode_plot():
    """The Bode plot of a read-back loop has the same curve data as the original's."""
    original = _result("two-stage")
    again = result_from_document(json.loads(json.dumps(to_document(original))))
    a, b = bode_figure(original), bode_figure(again)
    np.testing.assert_allclose(a.axes[0].get_lines()[0].get_ydata(), b.axes[0].get_lines()[0].get_ydata())


@pytest.mark.parametrize("doc", [{}, {"schema": "netloop.loops/1"}, {"schema": "netloop.loop/1", "netlist": "x"}])
def test_an_incomplete_document_is_a_results_error(doc):
    """Anything but a complete netloop.loop/1 document is a ResultsError, not a KeyError."""
    with pytest.raises(ResultsError):
        result_from_document(doc)


def _infinite(section: str, a):
    """The analysis with figures of one section infinite, as analyse() writes them for a limit case."""
    if section == "peaking":  # a crossover with a phase margin of exactly 0: |T/(1+T)| has no finite peak
        return replace(a, peaking=replace(a.peaking, peak_db=math.inf, absolute_peak_db=math.inf))
    if section == "second_order_estimate":  # zeta = 0, an undamped pole pair: Q = 1/(2 zeta) and the resonant peak infinite
        return replace(a, second_order=replace(a.second_order, q=math.inf, resonant_peak_db=math.inf))
    # a phase crossover where T = 0 (-inf dB), below the numerical floor: ignored, its gain margin +inf
    return replace(a, ignored_phase_crossovers=(PhaseCrossover(2e9, -540.0, -math.inf, math.inf, "upper"),))


@pytest.mark.parametrize("section", ["peaking", "second_order_estimate", "ignored_phase"])
def test_infinite_figures_come_back_as_infinities(section):
    """An infinite figure of the peaking, the second-order estimate or an ignored phase crossover is written null, listed
    under ``infinite``, and read back as that infinity."""
    # Reference: netloop.jobs.document's docstring (an infinite number is null AND listed under "infinite" by its dotted
    # path) and netloop.jobs.document_read's (a number listed under "infinite" comes back as that infinity).
    original = _result("two-stage")
    original = replace(original, analysis=_infinite(section, original.analysis))
    doc = json.loads(json.dumps(to_document(original), allow_nan=False))
    assert any(path.startswith(section) or path.startswith(f"crossovers.{section}") for path in doc["infinite"])
    again = result_from_document(doc)
    assert to_document(again) == doc
    a = again.analysis
    assert (a.peaking, a.second_order, a.ignored_phase_crossovers) == (original.analysis.peaking, original.analysis.second_order,
                                                                       original.analysis.ignored_phase_crossovers)


# -- the documents of several loops and of every loop group ------------------------------------------------------------


def test_several_loops_make_one_document_whose_verdict_combines_theirs():
    """multi_document("loops") nests each loop's document in order, and its verdict is the worst of theirs; an infinite
    extra figure is null and listed under ``infinite``."""
    # Reference: netloop.jobs.document's docstring (the shape of several loops; JSON has no infinity) and
    # netloop.jobs.loop_result.combined_verdict (one failing loop fails the whole).
    results = [_result("two-stage"), _result("unstable")]
    doc = multi_document("loops", results, netlist="x.cir", limit_db=math.inf)
    assert doc["loops"] == [to_document(r) for r in results] and [r.verdict for r in results] == ["pass", "fail"]
    assert (doc["schema"], doc["netlist"], doc["verdict"], doc["passed"]) == ("netloop.loops/1", "x.cir", "fail", False)
    assert doc["limit_db"] is None and doc["infinite"] == {"limit_db": "+inf"}
    json.dumps(doc, allow_nan=False)


def test_a_group_no_break_could_measure_is_an_inconclusive_entry_with_its_reason_and_advice(circuits):
    """A loop group without a result is written as its label, an inconclusive verdict, the reason and the advice."""
    # Reference: netloop.jobs.document's docstring (an unmeasured group's entry has only label, verdict, passed,
    # measured, reason, advice and group) and the verdict model (an unmeasured group makes the whole inconclusive).
    census = take_census(circuits / "miller_buffer.cir", sweep=False)
    (gc,) = census.groups
    reason, advice = "the probe refused every candidate", "name a node of the group and its driver: --at NODE --driver ELEMENT[.PIN]"
    doc = groups_document(LoopsCheck(census, (GroupResult(gc, None, reason, advice),), ("a note",)))
    (entry,) = doc["loops"]
    assert {k: v for k, v in entry.items() if k != "group"} == {"label": gc.label, "verdict": "inconclusive", "passed": False,
                                                                "measured": False, "reason": reason, "advice": advice}
    assert entry["group"]["index"] == 1 and entry["group"]["chosen"] == gc.chosen
    assert (doc["verdict"], doc["passed"], doc["notes"], doc["netlist"]) == ("inconclusive", False, ["a note"], census.source)
    assert list(doc) == ["schema", "netlist", "loops", "verdict", "passed", "notes"] and doc["schema"] == "netloop.loops/1"


@pytest.mark.parametrize("name", sorted(LOOPS))
def test_the_flat_records_are_written_as_asdict_writes_them(name):
    """The document's simulation and peaking sections are dataclasses.asdict of SimInfo and Peaking (peaking with its one
    added key), for loops with finite and infinite peaking: the shortcut that skips asdict's deep copy changes nothing."""
    from dataclasses import asdict

    from netloop.jobs.document import json_document

    result = _result(name)
    doc = to_document(result)
    assert doc["simulation"] == json_document({"simulation": asdict(result.sim)})["simulation"]
    peaking = {k: v for k, v in doc["peaking"].items() if k != "at_worst_crossover_db"}
    assert peaking == json_document({"peaking": asdict(result.analysis.peaking)})["peaking"]


def test_a_document_written_before_load_readers_reads_back_with_none():
    """A loop document from a results file written before the break listed load_readers (no such key) reads back with
    none, and one that lists them keeps them: trend and baseline read older results files too."""
    result = _result("two-stage")
    doc = json.loads(json.dumps(to_document(result)))
    del doc["break"]["load_readers"]
    assert result_from_document(doc).breaks == result.breaks and result.breaks.load_readers == ()
    readers = replace(result, breaks=replace(result.breaks, load_terminals=(), load_readers=("g1",)))
    assert result_from_document(json.loads(json.dumps(to_document(readers)))).breaks.load_readers == ("g1",)
