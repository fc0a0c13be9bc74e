"""A loop document read back into its LoopResult gives the same document again, field for field."""

from __future__ import annotations

import json

import numpy as np
import pytest

from netloop.analysis import analyse, parse_requirements
from netloop.errors import ResultsError
from netloop.jobs.document import to_document
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
}


def _result(name: str) -> LoopResult:
    a = analyse(F, LOOPS[name](F))
    reqs = tuple(r.check(a) for r in parse_requirements(["pm>=45", "gm>=10", "fc>1k", "peak<=3"]))
    return LoopResult("x.cir", name, "tian", BreakInfo("out", "out_drive", "out", ("m6.d",), ("m1.g",), (), "why", ("vin",), (("a", "a_1"),)),
                      a, reqs, ("x.cir:3: .tran 1n 1u",), ("a warning",), SimInfo("analytic", F.size, 1, True, None, None, 0.25, 2))


@pytest.mark.parametrize("name", sorted(LOOPS))
def test_round_trip_gives_the_same_document(name):
    """to_document(result_from_document(d)) == d, through JSON text, for loops with every kind of crossover, infinite
    figures (a gain margin with no phase crossover) and none (a loop that does not regulate)."""
    doc = json.loads(json.dumps(to_document(_result(name)), allow_nan=False))
    again = result_from_document(doc)
    assert to_document(again) == doc
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
