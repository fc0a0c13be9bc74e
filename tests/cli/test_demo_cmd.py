"""`netloop demo`: what it says it checks, the files it writes, and its JSON document against `netloop check --json`."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from netloop.cli.demo_cmd import circuits_dir
from netloop.cli.main import main


@pytest.mark.ngspice
def test_demo_writes_the_files_it_names_and_the_document_check_prints(tmp_path, capsys):
    """`netloop demo conditional --out DIR` says which circuit, netlist and break it checks, writes report.html,
    bode.png, nyquist.png and result.json into DIR (the files README "Set-up" names) and names each; result.json is the
    document `netloop check --json` prints for the same netlist, break and requirements (the timing aside)."""
    out = tmp_path / "demo"
    assert main(["demo", "conditional", "--out", str(out)]) == 0
    text = capsys.readouterr().out
    # the demo's netlist and break (circuits/README.md), in the circuits the package carries (a link to the repository's
    # circuits/ in a checkout, a copy in an installed or copied package)
    netlist = circuits_dir() / "cond_stable.cir"
    assert netlist.read_bytes() == (Path(__file__).resolve().parents[2] / "circuits" / "cond_stable.cir").read_bytes()
    assert text.startswith("netloop demo: conditionally stable loop: a lower and an upper gain margin\n"
                           f"  netlist {netlist}\n  break   out\n\nPASS  stable")
    names = ["report.html", "bode.png", "nyquist.png", "result.json"]
    assert text.splitlines()[-1] == "written: " + ", ".join(str(out / name) for name in names)
    assert sorted(p.name for p in out.iterdir()) == sorted(names)
    assert all((out / name).stat().st_size > 0 for name in names)
    saved = (out / "result.json").read_text(encoding="utf-8")
    assert main(["check", str(netlist), "--at", "out", "--require", "pm>=45", "--require", "gm>=10", "--json"]) == 0
    printed = capsys.readouterr().out
    documents = [json.loads(saved), json.loads(printed)]
    for doc in documents:
        assert doc["simulation"]["seconds"] > 0
        del doc["simulation"]["seconds"], doc["simulation"]["ngspice_seconds"]
    assert documents[0] == documents[1]
    # the layout is part of the contract: every document netloop prints or writes is indented by two spaces, so a
    # saved `check --json` and demo's result.json of one loop, or two saves of it, differ line by line only where
    # their figures do
    assert saved == json.dumps(json.loads(saved), indent=2) + "\n"
    assert printed == json.dumps(json.loads(printed), indent=2) + "\n"
