"""The figures of a corner record read back from its loop document as the document's writer put them there."""

from __future__ import annotations

import json
import math

import pytest

from netloop.jobs.document import json_document
from netloop.jobs.runs import FIGURES, figure_value


def _nested(path: str, value: float) -> dict:
    """{"margins": {"phase_margin_deg": value}} for "margins.phase_margin_deg"."""
    raw: object = value
    for part in reversed(path.split(".")):
        raw = {part: raw}
    return raw


@pytest.mark.parametrize("metric", list(FIGURES))
@pytest.mark.parametrize("value", [42.5, math.inf, -math.inf])
def test_a_figure_written_by_the_document_writer_reads_back_and_the_others_are_absent(metric, value):
    """Each figure, finite or +-inf, written by netloop.jobs.document.json_document (infinity as null listed under
    ``infinite``) and passed through JSON, reads back as written; every figure the document does not hold is None,
    including those whose parent object (margins, peaking) is missing."""
    doc = json.loads(json.dumps(json_document(_nested(FIGURES[metric].path, value)), allow_nan=False))
    record = {"outcome": "pass", "loop": doc}
    assert figure_value(record, metric) == value
    assert all(figure_value(record, m) is None for m in FIGURES if m != metric)


def test_a_figure_that_does_not_exist_is_none_and_a_record_without_a_loop_has_none():
    """A null figure not listed under ``infinite`` does not exist (the document's rule): None, as for an error record."""
    doc = json_document({"margins": {"phase_margin_deg": None, "gain_margin_db": 12.0}})
    assert figure_value({"loop": doc}, "pm") is None and figure_value({"loop": doc}, "gm") == 12.0
    assert figure_value({"outcome": "error", "loop": None}, "pm") is None
