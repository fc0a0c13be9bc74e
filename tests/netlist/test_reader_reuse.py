"""Included files indexed once per process: a second parse reuses the index only while the file's text is unchanged."""

from __future__ import annotations

from netloop.netlist import parse_file


def _write(tmp_path, lib_text: str):
    (tmp_path / "models.lib").write_text(lib_text)
    top = tmp_path / "top.cir"
    top.write_text("reuse test\n.lib models.lib fast\nR1 a 0 {rval}\nV1 a 0 dc 1\n.end\n")
    return top


def test_changed_include_of_the_same_size_is_read_again(tmp_path):
    """An include rewritten with new text of the same length (same size, possibly the same mtime) is indexed afresh, not reused stale."""
    top = _write(tmp_path, ".lib fast\n.param rval=1k\n.endl\n.lib slow\n.param rval=2k\n.endl\n")
    first = parse_file(top)
    _write(tmp_path, ".lib fast\n.param rval=3k\n.endl\n.lib slow\n.param rval=4k\n.endl\n")  # same byte count
    second = parse_file(top)
    assert [d.text for d in first.statements if getattr(d, "keyword", "") == ".param"] == [".param rval=1k"]
    assert [d.text for d in second.statements if getattr(d, "keyword", "") == ".param"] == [".param rval=3k"]


def test_second_parse_of_an_unchanged_include_equals_the_first(tmp_path):
    """Parsing the same files twice in one process gives equal netlists (statements, inclusions, files read)."""
    top = _write(tmp_path, ".lib fast\n.param rval=1k\n.model dm d is=1e-14\n.endl\n.lib slow\n.param rval=2k\n.endl\n")
    first, second = parse_file(top), parse_file(top)
    assert first.statements == second.statements
    assert first.inclusions == second.inclusions
    assert first.files == second.files == (str(top), str(tmp_path / "models.lib"))
