"""Messages in the words of the command line (issue 15.14): the library's driver= is --driver, or --at NODE= in compare."""

from __future__ import annotations

import pytest

from netloop.cli.check_cmd import sweep_from
from netloop.cli.main import build_parser, main
from netloop.cli.words import command_words


@pytest.mark.parametrize(("text", "command", "said"), [
    ("the split changes T; choose with driver=", "check", "the split changes T; choose with --driver"),
    ("nothing is left for the load side: use driver= to choose", "check", "nothing is left for the load side: use --driver to choose"),
    ("driver='m1.g' names only inputs on node fb", "check", "--driver m1.g names only inputs on node fb"),
    ("candidates: m1.g; name the driver with driver=ELEMENT[.PIN]", "sensitivity", "candidates: m1.g; name the driver with --driver ELEMENT[.PIN]"),
    ("the split changes T; choose with driver=", "compare", "the split changes T; choose with --at NODE=ELEMENT"),
    ("driver='m1.g' names only inputs on node fb", "compare", "--at NODE=m1.g names only inputs on node fb"),
    ("driver side given by --driver m1.d: m1.d", "check", "driver side given by --driver m1.d: m1.d"),
    ("choose the driver side with driver=ELEMENT[.PIN], e.g. driver=rz.n", "check",
     "choose the driver side with --driver ELEMENT[.PIN], e.g. --driver rz.n"),
    ("the driver side and the load side", "check", "the driver side and the load side"),
])
def test_the_librarys_option_is_named_as_the_commands_option(text, command, said):
    """Each phrasing of driver= the library uses becomes the command's own option (common practice: a message speaks the
    interface the user is in); text without it, or already in command-line words, is left as it is."""
    assert command_words(text, command) == said


def test_a_json_document_stays_json_when_its_warnings_end_in_driver():
    """A --json document whose warnings end with 'choose with driver=' is still valid JSON after the rewording, each
    warning reworded alone (a bare driver= at the end of a string never takes the string's closing quote as a value)."""
    # Reference: Python's json module (the document is read back); the warnings as break_loop writes them.
    import json

    doc = {"warnings": ["xp: the split changes T; choose with driver=", "xn: the split changes T; choose with driver="],
           "decided_by": "driver side given by driver='m1.d,m3.d': m1.d, m3.d"}
    for text in (command_words(json.dumps(doc, indent=2), "check"), command_words(json.dumps(doc), "check")):
        back = json.loads(text)
        assert back["warnings"] == ["xp: the split changes T; choose with --driver", "xn: the split changes T; choose with --driver"]
        assert back["decided_by"] == "driver side given by --driver m1.d,m3.d: m1.d, m3.d"


@pytest.mark.ngspice
def test_check_warnings_and_errors_name_the_driver_option(tmp_path, capsys):
    """On the command line, check's warning about a node feeding two loops says 'choose with --driver', and the error for
    --driver naming only inputs says '--driver e1.cp' (not driver=), the same sentences the library gives with driver=."""
    path = tmp_path / "two.cir"
    path.write_text("two loops through one node\nvin in 0 dc 0\ne1 o1 0 in x 100\ne2 o2 0 in x 100\nr1 o1 x 1k\nr2 o2 x 1k\n.end\n")
    main(["check", str(path), "--at", "x", "--fmax", "1meg"])
    out = capsys.readouterr().out
    assert "and which terminals sit on the driver side changes T; choose with --driver" in out and "driver=" not in out
    assert main(["check", str(path), "--at", "x", "--driver", "e1.cn", "--fmax", "1meg"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("netloop: error: --driver e1.cn names only inputs on node x") and "driver=" not in err


@pytest.mark.ngspice
def test_a_node_between_two_passive_branches_is_refused_without_contradiction(capsys):
    """The Miller buffer's cz joins Rz (from o1) and Cc (from out) only (circuits/miller_buffer.cir): the rules put both on
    the driver side, and the refusal says so with the element terminals and why, without calling them 'load' in the same
    breath as 'only driver terminals' (issue 15.14), and offers a --driver to try."""
    from pathlib import Path

    path = Path(__file__).resolve().parents[2] / "circuits" / "miller_buffer.cir"
    assert main(["check", str(path), "--at", "cz"]) == 2
    err = capsys.readouterr().err
    assert ("node cz: the rules put every terminal on the driver side (rz.n, cc.p: each brings the signal from an output "
            "through passive elements), so nothing is left for the load side; choose the driver side with --driver "
            "ELEMENT[.PIN], e.g. --driver rz.n") in err
    assert "(load)" not in err


@pytest.mark.parametrize(("fmin", "fmax", "expected"), [
    ("1k", None, (1e3, 1e10, True, False)),  # --fmin alone: the default top, the bottom fixed (never widened below it)
    ("10G", None, (1e10, 1e13, True, False)),  # at or above the default top: three decades above it
    ("20G", None, (2e10, 2e13, True, False)),
    (None, "1meg", (1e-2, 1e6, False, True)),
    (None, "10m", (1e-5, 1e-2, False, True)),  # at or below the default bottom: three decades below it
    ("1", "1k", (1.0, 1e3, True, True)),
])
def test_the_sweep_limits_given_are_kept_and_a_lone_limit_beyond_the_default_range_gets_three_decades(fmin, fmax, expected):
    """--fmin and --fmax become the sweep's limits, marked as given so that netloop never widens past them; one given alone
    beyond the other's default (10 mHz to 10 GHz) gets the other three decades away."""
    argv = ["check", "x.cir", "--at", "out", *(["--fmin", fmin] if fmin else []), *(["--fmax", fmax] if fmax else [])]
    sweep = sweep_from(build_parser(load="check").parse_args(argv))
    assert (sweep.fmin_hz, sweep.fmax_hz, sweep.fmin_given, sweep.fmax_given) == pytest.approx(expected)
    assert sweep.fmin_given is expected[2] and sweep.fmax_given is expected[3]


def test_compare_takes_either_method_or_both():
    """compare --method takes tian, middlebrook or both."""
    for method in ("tian", "middlebrook", "both"):
        assert build_parser(load="compare").parse_args(["compare", "x.cir", "--at", "a", "--at", "b", "--method", method]).method == method
