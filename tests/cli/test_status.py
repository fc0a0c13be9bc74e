"""On a terminal, stderr shows what is being simulated on one line, cleared before the results; elsewhere nothing."""

from __future__ import annotations

import io
import logging

import pytest

from netloop.cli import status
from netloop.cli.main import main


class _Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


@pytest.mark.ngspice
def test_check_on_a_terminal_shows_each_simulation_and_clears_the_line(circuits, monkeypatch, capsys):
    """A check whose stderr is a terminal writes a status for the first sweep and each refinement round, each
    over the previous one, and leaves the line cleared; the results on stdout are those of a plain run."""
    plain = main(["check", str(circuits / "miller_buffer.cir"), "--at", "out"]), capsys.readouterr()
    assert "simulating" not in plain[1].err  # not a terminal: no status at all
    terminal = _Terminal()
    monkeypatch.setattr(status.sys, "stderr", terminal)
    code = main(["check", str(circuits / "miller_buffer.cir"), "--at", "out"])
    out = capsys.readouterr().out
    shown = terminal.getvalue()
    assert code == plain[0] and out.splitlines()[0] == plain[1].out.splitlines()[0]
    assert "netloop: simulating the first sweep: 2 AC run(s)" in shown and "simulating refinement round 1" in shown
    assert shown.count("\r\033[K") >= 3 and shown.endswith("\r\033[K")  # each message over the last, then cleared
    assert logging.getLogger("netloop").handlers == [] and logging.getLogger("netloop").level == logging.NOTSET


def test_status_line_writes_nothing_where_stderr_is_not_a_terminal():
    """A stream that is not a terminal gets nothing, whatever is logged."""
    stream = io.StringIO()
    with status.status_line(stream) as handler:
        logging.getLogger("netloop").info("simulating something")
    assert handler is None and stream.getvalue() == ""


def test_loops_on_a_terminal_says_what_it_works_on_and_clears_the_line(circuits, monkeypatch, capsys):
    """`netloop loops` on a terminal shows the loop search and the split checks, and clears the line before the listing."""
    terminal = _Terminal()
    monkeypatch.setattr(status.sys, "stderr", terminal)
    assert main(["loops", str(circuits / "hier" / "top.cir")]) == 0
    shown = terminal.getvalue()
    assert "netloop: finding the loops of" in shown and "working out the probe's split" in shown
    assert shown.endswith("\r\033[K") and "loop group" in capsys.readouterr().out


def test_a_stage_that_ends_clears_the_line_at_once_and_shows_nothing_of_its_own():
    """A record marked CLEARS_STATUS (netloop.jobs.measure: 'simulations done') clears the line there and then, before the
    results are printed, and its own words are never shown."""
    from netloop.jobs.measure import CLEARS_STATUS

    terminal = _Terminal()
    with status.status_line(terminal):
        logging.getLogger("netloop").info("simulating the first sweep")
        logging.getLogger("netloop").info("simulations done", extra=CLEARS_STATUS)
        during = terminal.getvalue()
    assert during.startswith("\r\033[Knetloop: simulating the first sweep [") and during.endswith(" s]\r\033[K")
    assert "simulations done" not in terminal.getvalue()
