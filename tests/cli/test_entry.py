"""The console command's exit: the status and every byte of output of main(), in a process of its own."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from netloop.cli.main import main

CIRCUITS = Path(__file__).resolve().parent.parent.parent / "circuits"
ENTRY = "import sys; from netloop.cli.main import entry; sys.argv[0] = 'netloop'; entry()"


def _command(args: list[str], cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", ENTRY, *args], cwd=cwd, capture_output=True, text=True, check=False, timeout=300)


@pytest.mark.ngspice
@pytest.mark.parametrize("require", ["pm>=0", "pm>=179"])
def test_command_exits_with_mains_status_and_output(tmp_path, capsys, require):
    """`netloop check --json` as a command exits with main()'s status (0 passed, 1 failed) and prints main()'s whole document."""
    args = ["check", str(CIRCUITS / "miller_buffer.cir"), "--at", "out", "--json", "--require", require]
    # Reference: main() called in this process, the path every other CLI test takes.
    status = main(args)
    expected = json.loads(capsys.readouterr().out)
    done = _command(args, tmp_path)
    assert done.returncode == status
    printed = json.loads(done.stdout)
    for doc in (printed, expected):
        doc["simulation"].pop("seconds"), doc["simulation"].pop("ngspice_seconds")  # the fields that differ from run to run
    assert printed == expected


@pytest.mark.ngspice
def test_python_dash_m_netloop_is_the_command(tmp_path, capsys):
    """`python -m netloop` runs the same command: main()'s status and document, and its one-line errors."""
    args = ["check", str(CIRCUITS / "miller_buffer.cir"), "--at", "out", "--json", "--require", "pm>=0"]
    status = main(args)  # Reference: main() in this process, as above
    expected = json.loads(capsys.readouterr().out)
    done = subprocess.run([sys.executable, "-m", "netloop", *args], cwd=tmp_path, capture_output=True, text=True, check=False, timeout=300)
    assert (done.returncode, status) == (0, 0)
    printed = json.loads(done.stdout)
    for doc in (printed, expected):
        doc["simulation"].pop("seconds"), doc["simulation"].pop("ngspice_seconds")
    assert printed == expected
    bad = subprocess.run([sys.executable, "-m", "netloop", "check", "missing.cir", "--at", "out"], cwd=tmp_path, capture_output=True,
                         text=True, check=False, timeout=60)
    assert bad.returncode == 2 and bad.stderr.startswith("netloop: error: ") and "Traceback" not in bad.stderr


def test_command_reports_bad_input_with_status_2(tmp_path):
    """A missing netlist: the command prints main()'s one-line error on stderr and exits 2."""
    done = _command(["check", str(tmp_path / "missing.cir"), "--at", "out"], tmp_path)
    assert done.returncode == 2
    assert done.stderr.startswith("netloop: error: ") and "missing.cir" in done.stderr and done.stdout == ""


@pytest.mark.parametrize("raised, said", [(KeyboardInterrupt(), "netloop: interrupted"),
                                          (KeyboardInterrupt("3 of 8 corners are in r.jsonl"), "netloop: interrupted: 3 of 8 corners are in r.jsonl")])
def test_an_interrupted_command_says_so_on_stderr_and_exits_130(monkeypatch, capsys, raised, said):
    """Ctrl-C (or netloop.errors.Interrupted, which says what the run kept) ends any command with status 130 (128 + SIGINT,
    common practice) and one line on stderr, nothing on stdout."""
    import netloop.cli.loops_cmd as loops_cmd

    def interrupted(args):
        raise raised

    monkeypatch.setattr(loops_cmd, "run", interrupted)
    assert main(["loops", "any.cir"]) == 130
    out, err = capsys.readouterr()
    assert (out, err) == ("", said + "\n")
