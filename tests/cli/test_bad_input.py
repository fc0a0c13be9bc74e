"""Bad input at the CLI boundary: every command answers with one 'netloop: error:' line, exit 2, no traceback."""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pytest

from netloop.cli.main import main

ROOT = Path(__file__).resolve().parents[2]
# A self-contained behavioural loop (no .lib/.include), so every file a case needs is in tmp_path.
LOOP = ROOT / "circuits" / "cond_stable.cir"


@pytest.fixture
def inputs(tmp_path: Path) -> dict[str, str]:
    """The files the cases read, written fresh in tmp_path; names usable as {placeholders} in argv."""
    good = tmp_path / "good.cir"
    shutil.copyfile(LOOP, good)
    garbage = tmp_path / "garbage.cir"
    garbage.write_bytes(bytes(range(256)) * 4)  # seeded by construction: every byte value, not valid UTF-8
    syntax = tmp_path / "syntax.cir"
    syntax.write_text("title\nR1 a 0 1k\nR2 a\n.end\n")  # R2 lacks its second node and value
    (tmp_path / "umlaut.cir").write_text("title\nv1 ausgangµ 0 dc 1\nr1 ausgangµ 0 1k\n.end\n", encoding="utf-8")
    # terminal escapes and a bell, no NUL byte: read as text, and the faulty line is not echoed raw
    (tmp_path / "escapes.cir").write_bytes(b"title\nr1 a 0 1k\n\x1b[2J\x1b]0\x07 junk\n")
    folder = tmp_path / "folder"
    folder.mkdir()
    blocker = tmp_path / "blocker"  # a plain file: nothing can be written below it
    blocker.write_text("not a folder\n")
    (tmp_path / "bad_syntax.toml").write_text('netlist = "good.cir"\nat = [out\n')
    (tmp_path / "unknown_node.toml").write_text('netlist = "good.cir"\nat = "nosuch"\n')
    (tmp_path / "missing_netlist.toml").write_text('netlist = "missing.cir"\nat = "out"\n')
    (tmp_path / "bad_require.toml").write_text('netlist = "good.cir"\nat = "out"\nrequire = ["pm >> 5"]\n')
    (tmp_path / "ok.toml").write_text('netlist = "good.cir"\nat = "out"\n')
    (tmp_path / "bad_limit.toml").write_text('netlist = "good.cir"\nat = "out"\n[regression]\npm = "2 apples"\n')
    (tmp_path / "results.jsonl").write_text('{"record":"run","schema":"netloop.corners/1","plan":"ok.toml"}\nnot json\n{"record":"corner"}\n')
    (tmp_path / "samples.toml").write_text('netlist = "good.cir"\nat = "out"\n[samples]\ncount = 2\n')
    (tmp_path / "no_count.toml").write_text('netlist = "good.cir"\nat = "out"\n[samples]\ntarget = "99%"\n')
    return {"dir": str(tmp_path), "good": str(good), "garbage": str(garbage), "syntax": str(syntax),
            "folder": str(folder), "blocker": str(blocker)}


@pytest.fixture
def simulator_starts(monkeypatch) -> list[str]:
    """Records every start of the default simulator (the composing modules all start it through netloop.jobs.measure;
    the simulator itself still starts)."""
    import netloop.jobs.measure  # noqa: PLC0415

    starts: list[str] = []
    real = netloop.jobs.measure.default_simulator

    def recording(*args, **kwargs):
        starts.append("start")
        return real(*args, **kwargs)

    monkeypatch.setattr(netloop.jobs.measure, "default_simulator", recording)
    return starts


def _run(argv: list[str]) -> int:
    """main() as the shell sees it: argparse's usage errors become their exit status."""
    try:
        return main(argv)
    except SystemExit as exc:
        return int(exc.code)


def _snapshot(folder: str) -> dict[str, tuple[bytes, int]]:
    """Content and modification time of every file the user gave (all of tmp_path at the start)."""
    return {str(p): (p.read_bytes(), p.stat().st_mtime_ns) for p in Path(folder).rglob("*") if p.is_file()}


# (argv with {placeholders}, text the one error line must contain); each id says what the case proves.
CASES = [
    # inspect
    pytest.param(["inspect", "{dir}/missing.cir"], "missing.cir': No such file", id="inspect-missing-file-is-named"),
    pytest.param(["inspect", "{folder}"], "Is a directory", id="inspect-directory-instead-of-file"),
    pytest.param(["inspect", "{garbage}"], "garbage.cir:", id="inspect-binary-garbage-gives-file-line"),
    pytest.param(["inspect", "{syntax}"], "syntax.cir:3:", id="inspect-syntax-error-gives-file-line"),
    # loops
    pytest.param(["loops", "{dir}/missing.cir"], "missing.cir", id="loops-missing-file-is-named"),
    pytest.param(["loops", "{folder}"], "Is a directory", id="loops-directory-instead-of-file"),
    pytest.param(["loops", "{garbage}"], "garbage.cir:", id="loops-binary-garbage-gives-file-line"),
    pytest.param(["loops", "{good}", "--max-loops", "0"], "--max-loops must be at least 1", id="loops-bad-limit"),
    # check
    pytest.param(["check", "{dir}/missing.cir", "--at", "out"], "missing.cir", id="check-missing-file-is-named"),
    pytest.param(["check", "{folder}", "--at", "out"], "Is a directory", id="check-directory-instead-of-file"),
    pytest.param(["check", "{garbage}", "--at", "out"], "garbage.cir:", id="check-binary-garbage-gives-file-line"),
    pytest.param(["check", "{syntax}", "--at", "a"], "syntax.cir:3:", id="check-syntax-error-gives-file-line"),
    pytest.param(["check", "{good}", "--at", "nosuch"], "unknown node 'nosuch'", id="check-unknown-node"),
    pytest.param(["check", "{good}", "--at", "out", "--require", "pm>>5"], "cannot read requirement 'pm>>5'", id="check-bad-require-form"),
    pytest.param(["check", "{good}", "--at", "out", "--require", "zz>=5"], "unknown metric 'zz'", id="check-bad-require-metric"),
    pytest.param(["check", "{good}", "--at", "out", "--fmin", "abc"], "argument --fmin", id="check-fmin-not-a-number"),
    pytest.param(["check", "{good}", "--at", "out", "--fmin", "1g", "--fmax", "1k"], "0 < fmin < fmax", id="check-fmin-above-fmax"),
    pytest.param(["check", "{good}", "--at", "out", "--fmax", "100M"], "write 100meg or 100MHz for mega", id="check-fmax-bare-M-is-ambiguous"),
    pytest.param(["check", "{good}", "--at", "out", "--require", "fc>=100M"], "write 100meg or 100MHz", id="check-require-bare-M-is-ambiguous"),
    pytest.param(["check", "{good}", "--at", "out", "--require", "pm"], "quote the whole expression, as in --require 'pm>=60'",
                 id="check-require-without-operator-hints-at-quoting"),
    pytest.param(["check", "{good}", "--at", "out", "--ppd", "0"], "points per decade", id="check-bad-points-per-decade"),
    pytest.param(["check", "{good}", "--at-pair", "a"], "P,N", id="check-bad-node-pair"),
    pytest.param(["check", "{good}", "--at-pair", "out,err", "--driver", "eo"],
                 "each driver names its node: --driver out=ELEMENT[.PIN],... --driver err=ELEMENT[.PIN],...", id="check-pair-driver-without-its-node"),
    pytest.param(["check", "{good}", "--at-pair", "out,err", "--driver", "nosuch=eo"], "each driver names its node",
                 id="check-pair-driver-names-another-node"),
    pytest.param(["check", "{good}", "--at-pair", "out,err", "--driver", "out=eo", "--driver", "out=ro"],
                 "--driver names node out twice; put its terminals in one comma-separated list", id="check-pair-driver-node-twice"),
    pytest.param(["check", "{good}", "--at-pair", "out,err", "--driver", "out="], "expected ELEMENT[.PIN],... or NODE=ELEMENT[.PIN],...",
                 id="check-pair-driver-empty"),
    pytest.param(["check", "{good}", "--at", "out", "--plot", "{dir}/x.bmp"], "expected a file name ending in", id="check-plot-unknown-format"),
    pytest.param(["check", "{good}", "--at", "out", "--plot", "{dir}/nodir/x.png"], "cannot write the Bode plot",
                 id="check-plot-into-missing-folder-refused-before-simulating"),
    pytest.param(["check", "{good}", "--at", "out", "--report", "{blocker}/r.html"], "cannot write the HTML report",
                 id="check-report-below-a-file-refused-before-simulating"),
    # a file can never be written where a folder is: refused up front, not once the simulation is done
    pytest.param(["check", "{good}", "--at", "out", "--report", "{folder}"], "cannot write the HTML report to",
                 id="check-report-onto-a-folder-refused-before-simulating"),
    pytest.param(["yield", "{dir}/samples.toml", "--workers", "1", "--out", "{dir}/r.jsonl", "--plot", "{dir}/h.png", "--csv", "{folder}"],
                 "cannot write the sample table to", id="yield-csv-onto-a-folder-refused-before-simulating"),
    pytest.param(["check", "{good}", "--at", "out", "--csv", "{dir}/nodir/t.csv"], "cannot write the CSV samples",
                 id="check-csv-into-missing-folder-refused-before-simulating"),
    pytest.param(["check", "{good}", "--at", "out", "--keep-decks", "{blocker}"], "it is a file, not a folder",
                 id="check-keep-decks-is-a-file-refused-before-simulating"),
    # compare
    pytest.param(["compare", "{dir}/missing.cir", "--at", "out", "--at", "e1"], "missing.cir", id="compare-missing-file-is-named"),
    pytest.param(["compare", "{folder}", "--at", "a", "--at", "b"], "Is a directory", id="compare-directory-instead-of-file"),
    pytest.param(["compare", "{garbage}", "--at", "a", "--at", "b"], "garbage.cir:", id="compare-binary-garbage-gives-file-line"),
    pytest.param(["compare", "{good}", "--at", "out", "--at", "nosuch"], "unknown node 'nosuch'", id="compare-unknown-node"),
    pytest.param(["compare", "{good}", "--at", "out", "--at", "e", "--require", "pm>"], "cannot read requirement", id="compare-bad-require"),
    pytest.param(["compare", "{good}", "--at", "out", "--at", "e", "--fmin", "x"], "argument --fmin", id="compare-fmin-not-a-number"),
    pytest.param(["compare", "{good}", "--at", "out", "--at", "e", "--plot", "{blocker}/p.png"], "cannot write the Bode plot",
                 id="compare-plot-below-a-file-refused-before-simulating"),
    pytest.param(["compare", "{good}", "--at", "out", "--at", "e", "--plot", "{dir}/p.gif"], "expected a file name ending in",
                 id="compare-plot-unknown-format-refused-before-simulating"),
    # corners
    pytest.param(["corners", "{dir}/missing.toml"], "cannot read plan", id="corners-missing-plan-is-named"),
    pytest.param(["corners", "{folder}"], "Is a directory", id="corners-directory-instead-of-plan"),
    pytest.param(["corners", "{garbage}"], "not UTF-8 text", id="corners-binary-garbage-plan"),
    pytest.param(["corners", "{dir}/bad_syntax.toml"], "bad_syntax.toml:2: not valid TOML", id="corners-plan-syntax-error-gives-file-line"),
    pytest.param(["corners", "{dir}/unknown_node.toml"], "unknown_node.toml:2: cannot break", id="corners-unknown-node-gives-plan-line"),
    pytest.param(["corners", "{dir}/missing_netlist.toml"], "missing_netlist.toml:1: cannot read netlist", id="corners-missing-netlist-gives-plan-line"),
    pytest.param(["corners", "{dir}/bad_require.toml"], "cannot read requirement", id="corners-bad-require"),
    pytest.param(["corners", "{dir}/ok.toml", "--out", "{folder}", "--force"], "is a folder", id="corners-results-file-is-a-folder"),
    pytest.param(["corners", "{dir}/ok.toml", "--out", "{blocker}/r.jsonl"], "cannot write the results file", id="corners-results-below-a-file"),
    pytest.param(["corners", "{dir}/ok.toml", "--jobs", "1", "--out", "{dir}/r.jsonl", "--junit", "{blocker}/j.xml"], "cannot write the JUnit XML",
                 id="corners-junit-below-a-file-refused-before-running"),
    pytest.param(["corners", "{dir}/ok.toml", "--jobs", "1", "--out", "{dir}/r.jsonl", "--csv", "{dir}/nodir/c.csv"], "cannot write the corner table",
                 id="corners-csv-into-missing-folder-refused-before-running"),
    pytest.param(["corners", "{dir}/ok.toml", "--jobs", "0"], "--jobs: expected 1 or more processes", id="corners-bad-jobs"),
    pytest.param(["corners", "{dir}/ok.toml", "--out", "{dir}/r.jsonl", "--report", "{blocker}/r.html"], "cannot write the HTML report",
                 id="corners-report-below-a-file-refused-before-simulating"),
    pytest.param(["corners", "{dir}/ok.toml", "--out", "{dir}/r.jsonl", "--maps", "{blocker}/maps"], "cannot write the maps",
                 id="corners-maps-below-a-file-refused-before-simulating"),
    pytest.param(["corners", "{dir}/ok.toml", "--out", "{dir}/r.jsonl", "--limit", "pm=2deg"], "--limit needs a baseline",
                 id="corners-limit-without-baseline-refused-before-simulating"),
    pytest.param(["corners", "{dir}/ok.toml", "--out", "{dir}/r.jsonl", "--baseline", "{dir}/results.jsonl", "--limit", "pm>2"],
                 "cannot read limit 'pm>2'", id="corners-bad-limit-refused-before-simulating"),
    pytest.param(["corners", "{dir}/ok.toml", "--out", "{dir}/r.jsonl", "--baseline", "{dir}/results.jsonl", "--limit", "pm=-2"],
                 "the amount must be a finite number, 0 or more", id="corners-negative-limit-refused-before-simulating"),
    pytest.param(["corners", "{dir}/bad_limit.toml", "--out", "{dir}/r.jsonl"], "bad_limit.toml:3: cannot read limit",
                 id="corners-bad-plan-limit-gives-plan-line"),
    pytest.param(["corners", "{dir}/ok.toml", "--out", "{dir}/r.jsonl", "--baseline", "{good}"], "good.cir:1: not a results file",
                 id="corners-baseline-not-a-results-file-refused-before-simulating"),
    pytest.param(["corners", "{dir}/ok.toml", "--out", "{dir}/r.jsonl", "--baseline", "{dir}/results.jsonl"], "results.jsonl:2: not a JSON line",
                 id="corners-baseline-bad-line-gives-file-line-refused-before-simulating"),
    pytest.param(["corners", "{dir}/ok.toml", "--out", "{dir}/r.jsonl", "--baseline", "{dir}/nosuch.jsonl"], "cannot read the results file",
                 id="corners-missing-baseline-refused-before-simulating"),
    pytest.param(["corners", "{dir}/ok.toml", "--out", "{dir}/r.jsonl", "--baseline", "{dir}/r.jsonl"], "is the results file this run writes",
                 id="corners-baseline-is-the-output-refused-before-simulating"),
    # trend
    pytest.param(["trend", "{dir}/nosuch.jsonl"], "cannot read the results file", id="trend-missing-file-is-named"),
    pytest.param(["trend", "{good}"], "good.cir:1: not a results file", id="trend-not-a-results-file"),
    pytest.param(["trend", "{dir}/results.jsonl", "--plot", "{dir}/t.bmp"], "expected a file name ending in", id="trend-plot-unknown-format"),
    pytest.param(["corners", "{dir}/samples.toml"], "samples.toml:3: [samples] makes this a statistical plan: run it with 'netloop yield PLAN'",
                 id="corners-plan-with-samples-names-yield"),
    # yield
    pytest.param(["yield", "{dir}/missing.toml"], "cannot read plan", id="yield-missing-plan-is-named"),
    pytest.param(["yield", "{dir}/ok.toml"], "needs a [samples] table", id="yield-plan-without-samples-names-corners"),
    pytest.param(["yield", "{dir}/no_count.toml"], "no_count.toml:3: [samples] needs count = N", id="yield-samples-without-count-gives-plan-line"),
    pytest.param(["yield", "{dir}/unknown_node.toml"], "unknown_node.toml:1: a statistical plan needs", id="yield-corner-plan-refused"),
    pytest.param(["yield", "{dir}/samples.toml", "--target", "99"], "argument --target: the value '99' is ambiguous: write \"99%\"",
                 id="yield-target-without-percent-is-ambiguous"),
    pytest.param(["yield", "{dir}/samples.toml", "--sample", "nominal#3"], "no sample named 'nominal#3'",
                 id="yield-unknown-sample-refused-before-simulating"),
    pytest.param(["yield", "{dir}/samples.toml", "--sample", "nominal#1", "--target", "90%"], "--target does not go with it",
                 id="yield-sample-with-target-refused-before-simulating"),
    pytest.param(["yield", "{dir}/samples.toml", "--keep-decks", "{folder}"], "--keep-decks goes with --sample",
                 id="yield-keep-decks-without-sample-refused-before-simulating"),
    pytest.param(["yield", "{dir}/samples.toml", "--workers", "1", "--out", "{dir}/r.jsonl", "--plot", "{blocker}/h.png"], "cannot write the histograms",
                 id="yield-plot-below-a-file-refused-before-simulating"),
    pytest.param(["check", "{good}", "--at", ""], "argument --at: an empty node name; name the node to break, as in --at out",
                 id="check-empty-at-is-no-every-loop-refused-before-simulating"),
    pytest.param(["compare", "{good}", "--at", "out", "--at", " "], "argument --at: an empty node name",
                 id="compare-empty-at-refused-before-simulating"),
    pytest.param(["check", "{dir}/umlaut.cir", "--at", "ausgangµ"], "umlaut.cir:2:4: v1: node 'ausgangµ' has characters outside ASCII",
                 id="check-non-ascii-node-gives-file-line-refused-before-simulating"),
    pytest.param(["check", "{dir}/escapes.cir", "--at", "a"], "escapes.cir:3:1: unknown element type",
                 id="check-terminal-escapes-give-file-line"),
    pytest.param(["check", "{good}", "--at", "out", "--seed", "0"], "argument --seed: a seed is from 1 to 2147483647", id="check-seed-zero"),
    # sensitivity
    pytest.param(["sensitivity", "{dir}/missing.cir", "--at", "out"], "missing.cir", id="sensitivity-missing-file-is-named"),
    pytest.param(["sensitivity", "{garbage}", "--at", "out"], "garbage.cir:", id="sensitivity-binary-garbage-gives-file-line"),
    pytest.param(["sensitivity", "{good}"], "the following arguments are required: --at", id="sensitivity-needs-a-break-node"),
    pytest.param(["sensitivity", "{good}", "--at", "out", "--knob", "c9"], "'c9' is not a value netloop can change",
                 id="sensitivity-unknown-knob-names-close-ones"),
    pytest.param(["sensitivity", "{good}", "--at", "out", "--range", "2,10"], "argument --range: expected 0 < LOW < 1 < HIGH",
                 id="sensitivity-range-without-the-value"),
    pytest.param(["sensitivity", "{good}", "--at", "out", "--step", "1"], "argument --step: expected a step in (0, 0.2]",
                 id="sensitivity-step-too-large"),
    pytest.param(["sensitivity", "{good}", "--at", "out", "--solve", "c1"], "--solve needs a requirement",
                 id="sensitivity-solve-without-requirement-refused-before-simulating"),
    pytest.param(["sensitivity", "{good}", "--at", "out", "--plot", "{dir}/x.bmp"], "expected a file name ending in",
                 id="sensitivity-plot-unknown-format-refused-before-simulating"),
    pytest.param(["sensitivity", "{good}", "--at", "out", "--report", "{blocker}/r.html"], "cannot write the HTML report",
                 id="sensitivity-report-below-a-file-refused-before-simulating"),
    # demo
    pytest.param(["demo", "nosuch"], "invalid choice: 'nosuch'", id="demo-unknown-name"),
    pytest.param(["demo", "--out", "{blocker}/sub"], "cannot write the demo folder", id="demo-out-below-a-file"),
    # no command
    pytest.param(["bogus"], "invalid choice: 'bogus'", id="unknown-command"),
]


@pytest.mark.parametrize(("argv", "expected"), CASES)
def test_bad_input_is_one_error_line_exit_2(inputs, argv, expected, capsys, request, simulator_starts):
    """Each bad input exits 2 with one 'netloop: error:' line saying what (and where), no traceback, input files untouched."""
    args = [a.format(**inputs) for a in argv]
    before = _snapshot(inputs["dir"])
    assert _run(args) == 2
    captured = capsys.readouterr()
    lines = captured.err.splitlines()
    assert lines and lines[0].startswith("netloop: error: "), captured.err
    assert expected in lines[0], captured.err
    assert "Traceback" not in captured.err
    # only a netlist syntax error adds context below its one line: the offending line and a caret
    assert len(lines) == 1 or (len(lines) == 3 and lines[2].strip() == "^"), captured.err
    if args[0] in ("corners", "yield"):  # a refused corner run starts nothing: no results file appears
        assert not (Path(inputs["dir"]) / "r.jsonl").exists()
    if "refused-before-simulating" in request.node.callspec.id:  # refused up front: the simulator never started
        assert simulator_starts == []
    after = _snapshot(inputs["dir"])
    assert {p: v for p, v in after.items() if p in before} == before


def test_binary_junk_and_terminal_escapes_never_reach_the_terminal(inputs, capsys):
    """A binary file is refused as not a text netlist, with its file:line; a line of terminal escapes is shown with '?'
    in their place, one for one, so the caret still points at the fault (common practice: compilers escape such bytes)."""
    assert _run(["check", inputs["garbage"], "--at", "out"]) == 2
    err = capsys.readouterr().err
    assert err == f"netloop: error: {inputs['garbage']}:1: not a text netlist: it holds binary bytes (a NUL byte on line 1); give the SPICE netlist file\n"
    assert _run(["check", f"{inputs['dir']}/escapes.cir", "--at", "a"]) == 2
    lines = capsys.readouterr().err.splitlines()
    assert lines[1:] == ["    ?[2J?]0? junk", "    ^"]
    assert all(ch.isprintable() for line in lines for ch in line)


@pytest.mark.ngspice
@pytest.mark.parametrize(("element", "argv", "status"), [
    ("e1 a 0 in fb 1e300", ["check"], 3),
    ("c1 out 0 1e300", ["check", "--at", "fb"], 3),
    ("c1 out 0 1e300", ["check"], 3),
])
def test_values_of_1e300_leak_no_numpy_warning(tmp_path, capsys, element, argv, status):
    """A gain of 1e300 (|T| beyond what a float holds once squared) or a capacitor of 1e300 F (T exactly 0 at the
    bottom of the sweep) in a netlist (issue 15.13): the loop is INCONCLUSIVE (exit 3), and no numpy RuntimeWarning
    reaches the terminal (filterwarnings = error would also turn one into a traceback)."""
    path = tmp_path / "big.cir"
    text = "loop with an absurd value\nvin in 0 dc 0.9\ne1 a 0 in fb 1000\nr1 a out 1k\nc1 out 0 1n\nrf out fb 1k\nrg fb 0 1k\n.end\n"
    card = element.split()[0] + " "
    text = "\n".join(element if line.startswith(card) else line for line in text.split("\n"))
    assert element in text
    path.write_text(text)
    assert _run([argv[0], str(path), *argv[1:]]) == status
    captured = capsys.readouterr()
    assert "INCONCLUSIVE" in captured.out and "Warning" not in captured.err and "Traceback" not in captured.err


def test_an_error_carries_what_in_the_netlist_may_be_behind_it(tmp_path, capsys):
    """A netlist whose first line reads as an element (SPICE takes it as the title) and a node not in the circuit: the
    error line, then a note naming the title line and its file:line, and exit 2."""
    path = tmp_path / "title.cir"
    path.write_text("r1 in out 1k\ne1 out 0 0 in 1000\nr2 in 0 1k\n.end\n")
    assert _run(["check", str(path), "--at", "zz"]) == 2
    err = capsys.readouterr().err.splitlines()
    assert err[0] == f"netloop: error: {path}: unknown node 'zz'"
    assert err[1].startswith(f"netloop: note: {path}:1: the first line reads as an element (r1 in out 1k), but SPICE takes ")


def test_a_reader_that_goes_away_early_ends_the_run_quietly(tmp_path):
    """`netloop loops NETLIST --json | head -1`: the reader leaves after one line; netloop exits 0 with nothing on stderr
    (no traceback), as command-line tools do when their reader goes away (common practice)."""
    import subprocess  # noqa: PLC0415
    import sys  # noqa: PLC0415

    from test_entry import ENTRY  # noqa: PLC0415 - the console command

    from netloop.sim.spawn import this_netloop  # noqa: PLC0415

    # forty separate two-stage loops (invented): a document of about 160 kB, more than a pipe holds unread (64 kB on Linux)
    big = "forty loops (invented)\n" + "".join(f"e{i}a a{i} 0 b{i} 0 -1\ne{i}b b{i} 0 a{i} 0 1\nr{i}a a{i} 0 1k\nr{i}b b{i} 0 1k\n"
                                                for i in range(40)) + ".end\n"
    (tmp_path / "loops.cir").write_text(big)
    netloop = subprocess.Popen([sys.executable, "-c", ENTRY, "loops", str(tmp_path / "loops.cir"), "--json"], stdout=subprocess.PIPE,
                               stderr=subprocess.PIPE, env=this_netloop(os.environ))
    netloop.stdout.readline()
    netloop.stdout.close()  # the reader goes away with most of the document unread
    _, err = netloop.communicate(timeout=120)
    assert netloop.returncode == 0 and err == b""
