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


TWO_LOOPS = ("two independent loops (invented)\nG1 0 a a2 0 1m\nRa a 0 10k\nCa a 0 1n\nE1 a2 0 a 0 -1\n"
             "G2 0 b b2 0 1m\nRb b 0 10k\nCb b 0 1n\nE2 b2 0 b 0 -1\n.end\n")


@pytest.mark.ngspice
@pytest.mark.parametrize("given, written", [("t.csv", ["t-a2.csv", "t-b2.csv"]), ("t", ["t-a2", "t-b2"])])
def test_each_loops_samples_go_beside_the_file_named_even_in_a_folder_with_a_dot(tmp_path, capsys, given, written):
    """check without --at measures each loop group and writes one CSV per loop, its break node before the extension (or
    after the name when it has none), in the folder given: a dot in the folder's name is not an extension (it put the
    files in a folder that does not exist, /tmp/run-a2.1/t, and the command failed)."""
    folder = tmp_path / "run.1"
    folder.mkdir()
    (folder / "two.cir").write_text(TWO_LOOPS)
    assert main(["check", str(folder / "two.cir"), "--csv", str(folder / given)]) == 0
    capsys.readouterr()
    assert sorted(p.name for p in folder.iterdir() if p.name != "two.cir") == written
    header = (folder / written[0]).read_text().splitlines()[0]
    assert header.startswith("freq_hz")
