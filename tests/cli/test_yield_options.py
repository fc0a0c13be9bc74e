"""`netloop yield`'s options as the parser reads them and as --help states them (no ngspice: nothing is run)."""

from __future__ import annotations

from pathlib import Path

import pytest

from netloop.cli.main import build_parser, main


def _parse(*argv: str):
    return build_parser(load="yield").parse_args(["yield", "plan.toml", *argv])


def _help(capsys) -> str:
    with pytest.raises(SystemExit):
        main(["yield", "--help"])
    return " ".join(capsys.readouterr().out.split())


def test_resume_and_force_are_flags_and_exclude_each_other(capsys):
    """--resume and --force take no value, and not both: one continues the results file, the other replaces it."""
    # Reference: docs/yield.md, the usage line `[--resume | --force]` and "Killed runs resume".
    assert (_parse("--resume").resume, _parse("--resume").force) == (True, False)
    assert (_parse("--force").resume, _parse("--force").force) == (False, True)
    assert (_parse().resume, _parse().force) == (False, False)
    with pytest.raises(SystemExit) as stop:
        _parse("--resume", "--force")
    assert stop.value.code == 2 and "not allowed with argument" in capsys.readouterr().err


def test_help_says_what_each_does_to_an_existing_results_file(capsys):
    """--help says --resume keeps the samples already run and --force replaces the file, which is otherwise never
    overwritten: the one promise that decides whether a user's finished samples survive."""
    # Reference: docs/yield.md, "Killed runs resume": "`--resume` measures only the samples not in it, `--force` starts
    # afresh, and without either an existing results file is never touched".
    text = _help(capsys)
    assert "--resume continue an existing results file: samples already in it are not run again" in text
    assert "--force replace an existing results file (without --resume or --force it is never overwritten)" in text


@pytest.mark.parametrize(("written", "value"), [("90%", 0.9), ("99.9 %", 0.999), ("0.95", 0.95)])
def test_confidence_and_target_read_a_fraction_as_the_plan_does(written, value):
    """--confidence and --target take a fraction in the forms a plan's [samples] table takes, as a number."""
    # Reference: docs/yield.md: fractions are written "99%", "99.9 %" or 0.99.
    assert _parse("--confidence", written).confidence == pytest.approx(value)
    assert _parse("--target", written).target == pytest.approx(value)


@pytest.mark.parametrize("option", ["--confidence", "--target"])
def test_a_bare_percentage_is_refused_as_ambiguous(option, capsys):
    """99 alone is refused with exit status 2 for --confidence as for --target, as in a plan."""
    # Reference: docs/yield.md: "`99` alone is refused as ambiguous".
    with pytest.raises(SystemExit) as stop:
        _parse(option, "99")
    assert stop.value.code == 2 and f"argument {option}: the value '99' is ambiguous" in capsys.readouterr().err


def test_help_gives_the_defaults_of_target_and_confidence(capsys):
    """--help states what --target decides and both defaults (the plan's, else every sample must pass; the plan's, else
    95 %), as docs/yield.md gives them."""
    # Reference: docs/yield.md: `target` optional, also --target; without a target PASS means every sample passed;
    # `confidence` default 95 %, also --confidence.
    text = _help(capsys)
    assert ("--target YIELD the yield to show, e.g. 99% or 0.999: decides PASS, FAIL or INCONCLUSIVE (default: the plan's "
            "target; without one, every sample must pass)") in text
    assert "--confidence LEVEL confidence of the bounds and the verdict, e.g. 95% (default: the plan's, else 95%)" in text


def test_a_folder_where_the_scatter_plot_goes_is_refused_before_any_sample(tmp_path, capsys):
    """`--plot h.png` writes the scatter to h-scatter.png beside it (README); a folder of that name can never be written
    as the file, so the run is refused at once (one line, exit 2), before any sample runs and before the results file is
    begun, rather than after every sample has been measured."""
    (tmp_path / "h-scatter.png").mkdir()
    plan = Path(__file__).resolve().parents[2] / "circuits" / "plans" / "sky130_miller_yield.toml"
    out = tmp_path / "r.jsonl"
    assert main(["yield", str(plan), "--out", str(out), "--plot", str(tmp_path / "h.png")]) == 2
    err = capsys.readouterr().err.strip()
    assert err == f"netloop: error: cannot write the scatter plot to {str(tmp_path / 'h-scatter.png')!r}: Is a directory"
    assert not out.exists()
