"""Output files written after the results are printed: a file that cannot be written loses no result."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from netloop.cli.main import main

LOOP = Path(__file__).resolve().parents[2] / "circuits" / "cond_stable.cir"


@pytest.mark.ngspice
@pytest.mark.skipif(not Path("/dev/full").exists(), reason="needs /dev/full (a file whose every write fails: no space left)")
@pytest.mark.parametrize("json_out", [False, True])
def test_a_failed_output_write_comes_after_the_printed_result(capsys, json_out):
    """check --csv /dev/full prints the whole summary (or JSON document) first, then one error line naming the file,
    and exits 2."""
    args = ["check", str(LOOP), "--at", "out", "--csv", "/dev/full", *(["--json"] if json_out else [])]
    assert main(args) == 2
    out, err = capsys.readouterr()
    if json_out:
        assert json.loads(out)["margins"]["phase_margin_deg"] is not None
    else:
        assert out.startswith(("PASS", "FAIL", "INCONCLUSIVE")) and "caution:" in out
    assert err.strip().splitlines() == [err.strip()] and "cannot write the CSV samples to '/dev/full'" in err
