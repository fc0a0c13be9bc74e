"""`netloop inspect`: what netloop reads, as text and JSON, and one-line errors for bad input."""

from __future__ import annotations

import json

from netloop.cli.main import main

DECK = """readout front end (invented)
.subckt cell a b
R1 a mid 1k
C1 mid b 1p
.ends cell
.subckt pair p q
X1 p m cell
X2 m q cell
.ends pair
V1 in 0 1
Xp in out pair
Xq out 0 pair
Rdangle out stub 1k
M1 d g 0 0 undefined_model
.op
.control
run
.endc
"""


def _write(tmp_path, text, name="deck.cir"):
    path = tmp_path / name
    path.write_text(text)
    return path


def test_json_counts_come_from_the_flattened_circuit(tmp_path, capsys):
    """JSON gives flattened element and node counts, instances per subcircuit, ignored statements and warnings."""
    path = _write(tmp_path, DECK)
    assert main(["inspect", str(path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    # by hand: 2 pairs x 2 cells x (R + C) = 8, plus V1, Rdangle, M1
    assert data["elements"] == 11
    assert data["by_kind"] == {"C": 4, "M": 1, "R": 5, "V": 1}
    # in, out, stub, d, g, xp.m, xq.m and one internal mid per cell (4)
    assert data["nodes"] == 11
    assert data["subcircuits"] == {"cell": 4, "pair": 2}
    assert data["files"] == [str(path)]
    assert [d["statement"] for d in data["ignored"]] == [".op", ".control"]
    assert data["ignored"][0]["where"] == f"{path}:15"
    assert any("undefined model 'undefined_model'" in w for w in data["warnings"])
    assert any("'stub' has a single connection" in w for w in data["warnings"])


def test_text_output_lists_sections(tmp_path, capsys):
    """The text form names the counts, instances, files, library sections and what was set aside."""
    (tmp_path / "m.lib").write_text(".lib typ\n.model nch nmos level=1\n.endl typ\n")
    path = _write(tmp_path, "t\n.lib m.lib typ\nM1 d g 0 0 nch\nV1 d 0 1\nV2 g 0 1\n.tran 1n 1u\n")
    assert main(["inspect", str(path)]) == 0
    out = capsys.readouterr().out
    assert "elements  3 after flattening" in out
    assert "nodes     2 (ground excluded)" in out
    assert f"{tmp_path / 'm.lib'} [typ]" in out
    assert f"{path}:6: .tran" in out


def test_text_counts_instances_under_their_heading(tmp_path, capsys):
    """The text form gives each subcircuit's instance count, after flattening, under the heading "subcircuit instances"."""
    path = _write(tmp_path, DECK)
    assert main(["inspect", str(path)]) == 0
    lines = capsys.readouterr().out.splitlines()
    at = lines.index("subcircuit instances")
    # by hand: Xp and Xq are two pairs, each of two cells
    assert [line.split() for line in lines[at + 1:at + 3]] == [["cell", "4"], ["pair", "2"]]
    assert lines[at - 1] == "by kind   C 4, M 1, R 5, V 1" and lines[at + 3] == "files read (1)"


def test_syntax_error_is_one_clear_message_exit_2(tmp_path, capsys):
    """A malformed card exits 2 with 'netloop: error: file:line:col: ...' and no traceback."""
    path = _write(tmp_path, "t\nR1 a 0 1\nR2 a\n")
    assert main(["inspect", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.splitlines()[0] == f"netloop: error: {path}:3:6: R2: expected 2 nodes and a value"
    assert "Traceback" not in err


def test_missing_file_and_missing_include_exit_2(tmp_path, capsys):
    """A missing netlist or include file exits 2 naming the file (and the including line)."""
    assert main(["inspect", str(tmp_path / "nope.cir")]) == 2
    assert "nope.cir" in capsys.readouterr().err
    path = _write(tmp_path, "t\n.include sub/none.inc\n")
    assert main(["inspect", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"netloop: error: {path}:2:1: cannot read") and "Traceback" not in err


def test_user_file_is_not_modified(tmp_path, capsys):
    """Inspecting never changes the user's file."""
    path = _write(tmp_path, DECK)
    main(["inspect", str(path), "--json"])
    capsys.readouterr()
    assert path.read_text() == DECK


def test_undefined_subcircuit_warned_once(tmp_path, capsys):
    """An instance of an undefined subcircuit is one warning with its file:line, and stays one X element."""
    path = _write(tmp_path, "t\nX1 a b nowhere\nR1 a b 1\n")
    assert main(["inspect", str(path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    hits = [w for w in data["warnings"] if "nowhere" in w]
    assert len(hits) == 1 and hits[0].startswith(f"{path}:2:1: X1: undefined subcircuit")
    assert data["by_kind"] == {"R": 1, "X": 1}


def test_single_connection_nodes_are_listed_fifty_at_most_then_counted(tmp_path):
    """Each node with a single connection is named, fifty at most; past fifty the rest are counted on one line (an
    unterminated bus of a big netlist would otherwise bury every other warning)."""
    from netloop.cli.inspect_cmd import inspect_summary

    for dangling, listed, more in ((50, 50, None), (51, 50, "... and 1 more nodes with a single connection")):
        text = "dangling resistors (invented)\nV1 a 0 1\nR0 a 0 1k\n" + "".join(f"R{k} a s{k} 1k\n" for k in range(1, dangling + 1))
        warnings = inspect_summary(_write(tmp_path, text))["warnings"]
        single = [w for w in warnings if w.endswith("has a single connection")]
        assert len(single) == listed and single[0] == "node 's1' has a single connection"
        assert [w for w in warnings if w.startswith("... and")] == ([more] if more else [])
