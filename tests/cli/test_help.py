"""The --help pages: the README sections they point to exist, and options with different meanings have different names."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from netloop.cli.main import main

README = Path(__file__).resolve().parent.parent.parent / "README.md"


def _help(command: str, capsys) -> str:
    with pytest.raises(SystemExit):
        main([command, "--help"])
    return " ".join(capsys.readouterr().out.split())


@pytest.mark.parametrize("command", ["check", "compare", "corners", "loops", "inspect", "demo", "sensitivity", "trend", "yield"])
def test_help_points_only_to_readme_sections_that_exist(command, capsys):
    """Every "README section 'X'" a --help page names is a heading of README.md."""
    headings = {line.lstrip("#").strip() for line in README.read_text(encoding="utf-8").splitlines() if line.startswith("#")}
    for name in re.findall(r"README section '([^']+)'", _help(command, capsys)):
        assert name in headings


def test_ngspice_processes_and_dask_workers_have_different_names(capsys):
    """check and compare take --processes (ngspice processes), corners takes --workers (Dask workers); no help page
    offers the one name --jobs for both any more."""
    for command in ("check", "compare"):
        text = _help(command, capsys)
        assert "--processes N ngspice processes" in text and "--jobs" not in text
    text = _help("corners", capsys)
    assert "--workers N Dask worker processes" in text and "--jobs" not in text
    text = _help("sensitivity", capsys)  # both: ngspice processes for each measurement, Dask workers for the knobs
    assert "--processes N ngspice processes" in text and "--workers N Dask worker processes" in text and "--jobs" not in text
