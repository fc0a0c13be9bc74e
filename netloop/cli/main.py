"""The ``netloop`` command: parses arguments, calls the public API, maps errors to exit codes."""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence
from typing import NoReturn

# Each command lives in its own module with ``add_parser(subparsers)`` and ``run(args) -> int``.
# Modules are imported lazily so that ``netloop --help`` starts fast.
COMMANDS: dict[str, tuple[str, str]] = {
    "inspect": ("netloop.cli.inspect_cmd", "show what netloop reads in a netlist"),
    "check": ("netloop.cli.check_cmd", "measure a loop's return ratio and stability margins"),
    "loops": ("netloop.cli.loops_cmd", "list the feedback loops and where to break them"),
    "compare": ("netloop.cli.compare_cmd", "compare break locations side by side"),
    "sensitivity": ("netloop.cli.sensitivity_cmd", "rank the values that set a loop's margins; solve for one that meets a requirement"),
    "corners": ("netloop.cli.corners_cmd", "run a corner plan as a regression"),
    "trend": ("netloop.cli.trend_cmd", "the worst phase margin of each corner over several corner runs"),
    "yield": ("netloop.cli.yield_cmd", "the yield of the margins over a process's statistical models (Monte Carlo samples)"),
    "demo": ("netloop.cli.demo_cmd", "check a bundled demo circuit and write its report"),
}


class _Parser(argparse.ArgumentParser):
    """argparse with usage errors on one line, in the same form as every other error of the CLI."""

    def error(self, message: str) -> NoReturn:
        command = self.prog.removeprefix("netloop").strip()
        where = f"{command}: " if command else ""
        self.exit(2, f"netloop: error: {where}{message} (see '{self.prog} --help')\n")


def _available() -> dict[str, tuple[str, str]]:
    from importlib.util import find_spec

    return {name: spec for name, spec in COMMANDS.items() if find_spec(spec[0]) is not None}


def build_parser(load: str | None = None) -> argparse.ArgumentParser:
    parser = _Parser(
        prog="netloop",
        description="Loop gain and stability margins of feedback loops in a SPICE netlist, through ngspice.",
        epilog="Small-signal margins around one operating point do not prove large-signal stability.",
    )
    from netloop import __version__

    parser.add_argument("--version", action="version", version=f"netloop {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, (module, helptext) in _available().items():
        if load is None or name != load:
            sub.add_parser(name, help=helptext, add_help=False)
            continue
        importlib.import_module(module).add_parser(sub.add_parser(name, help=helptext, description=helptext))
    return parser


EXIT_STATUS = {"pass": 0, "fail": 1, "error": 2, "inconclusive": 3}
"""The exit status of each verdict (netloop.jobs.loop_result.VERDICTS; "error": bad input or a simulator failure)."""


def exit_status(verdict: str) -> int:
    """The process status for a verdict: 0 pass, 1 fail, 2 error, 3 inconclusive."""
    return EXIT_STATUS[verdict]


def main(argv: Sequence[str] | None = None) -> int:
    """Run one netloop command; returns the exit status (0 pass, 1 unstable or failed, 2 bad input or simulator failure, 3 inconclusive)."""

    argv = list(sys.argv[1:] if argv is None else argv)
    command = next((a for a in argv if not a.startswith("-")), None)
    parser = build_parser(load=command if command in COMMANDS else None)
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    module = importlib.import_module(COMMANDS[args.command][0])
    from netloop.cli.words import said_on_the_command_line

    with said_on_the_command_line(args.command):  # results, warnings and errors name this command's options
        return _run(module, args)


def _run(module, args: argparse.Namespace) -> int:
    """One command's run, its errors mapped to exit statuses."""
    from netloop.cli.status import status_line
    from netloop.errors import NetloopError

    try:
        with status_line():  # on a terminal: what is being simulated, on one line of stderr
            return int(module.run(args))
    except NetloopError as exc:
        print(f"netloop: error: {exc}", file=sys.stderr)
        for note in getattr(exc, "__notes__", ()):  # what in the netlist may be behind it (netloop.jobs.loop_result.caveats_on_error)
            print(f"netloop: note: {note}", file=sys.stderr)
        return 2
    except KeyboardInterrupt as exc:  # netloop.errors.Interrupted says what the run kept
        print(f"netloop: interrupted: {exc}" if str(exc) else "netloop: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # the reader went away (`netloop ... | head`): not an error of ours, and no traceback
        import os

        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 0


def entry() -> None:
    """The console command: main(), then the exit of a process that has nothing left to free."""
    code = main()
    _exit_quickly(code)
    sys.exit(code)


def _exit_quickly(code: int) -> None:
    """End the process with ``code`` without tearing down its objects one by one (0.15 s for the
    records of a 100k-element netlist): exit handlers run and the output is flushed as at a normal
    exit. Returns (and the normal exit follows) while another thread runs or the output cannot be flushed."""
    import atexit
    import os
    import threading

    if threading.active_count() > 1:
        return
    atexit._run_exitfuncs()  # noqa: SLF001 - what the interpreter calls at exit, before its teardown
    try:
        sys.stdout.flush()
        sys.stderr.flush()
    except (OSError, ValueError):
        return  # the normal exit reports it as before
    os._exit(code)
