"""The --help pages: the README sections they point to exist, and options with different meanings have different names."""

from __future__ import annotations

import argparse
import importlib
import re
from pathlib import Path

import pytest

from netloop.cli.main import COMMANDS, main

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


def _arguments(command: str) -> list[argparse.Action]:
    """The arguments ``netloop COMMAND`` takes, as its module adds them (argparse keeps no public list of them)."""
    parser = argparse.ArgumentParser(prog=f"netloop {command}")
    importlib.import_module(COMMANDS[command][0]).add_parser(parser)
    return parser._actions  # noqa: SLF001


@pytest.mark.parametrize("command", sorted(COMMANDS))
def test_every_argument_says_what_it_is_in_help(command):
    """Every argument a --help page lists has a help text (argparse lists one without it bare, name only); only the
    hidden earlier names (argparse.SUPPRESS) have none."""
    for action in _arguments(command):
        if action.help is not argparse.SUPPRESS:
            assert action.help and action.help.strip(), f"netloop {command}: {action.option_strings or action.dest} has no help"


@pytest.mark.parametrize("command", sorted(COMMANDS))
def test_every_plot_option_names_every_format_a_plot_is_written_in(command):
    """A --plot help names each format netloop.report.figure writes (FORMATS, chosen by the file's extension): the help of
    check, compare and sensitivity named PNG and SVG only, while .pdf is written too."""
    from netloop.report.figure import FORMATS  # noqa: PLC0415

    for action in _arguments(command):
        if "--plot" in action.option_strings:
            assert all(f".{fmt}" in action.help for fmt in FORMATS), f"netloop {command} --plot: {action.help}"


@pytest.mark.parametrize(("command", "readme", "usage"), [
    ("check", "`--require 'EXPR'`", "[--require EXPR]"),  # the options table of "Checking a loop"
    ("demo", "netloop demo [buffer|ldo|conditional|ac-coupled] [--out DIR]", "[--out DIR]"),  # "Other commands"
    ("corners", "[--out FILE.jsonl]", "[--out FILE.jsonl]"),  # "Running, resuming, reading the results"
])
def test_usage_names_option_values_as_the_readme_does(command, readme, usage, capsys):
    """The usage line writes an option's value with the placeholder the README uses for it (EXPR, DIR, FILE.jsonl)."""
    assert readme in README.read_text(encoding="utf-8")
    assert usage in _help(command, capsys)


def test_corners_out_help_names_the_results_file_written_by_default(capsys, tmp_path):
    """corners --help gives the default results file as the README does, PLAN.results.jsonl next to the plan, and that
    is the file a run without --out writes (netloop.jobs.corners.default_results_path)."""
    from netloop.jobs.corners import default_results_path

    assert "--out FILE.jsonl the results file, one JSON line per corner (default: PLAN.results.jsonl next to the plan)" in _help("corners", capsys)
    assert "(`PLAN.results.jsonl` next to the plan, or `--out FILE.jsonl`)" in " ".join(README.read_text(encoding="utf-8").split())
    assert default_results_path(str(tmp_path / "plans" / "ldo.toml")) == tmp_path / "plans" / "ldo.results.jsonl"
