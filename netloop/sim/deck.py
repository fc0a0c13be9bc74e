"""Turn a SimJob into ngspice text: the circuit with its options and the control steps of its runs."""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Literal

import jinja2

from netloop.errors import SimulationError
from netloop.sim.frequency import sweep_problem
from netloop.sim.library import NGSPICE_THREADS
from netloop.sim.job import AcSweep, Alter, SimJob

__all__ = [
    "PARAMS_RAW",
    "Step",
    "alter_vector",
    "check_workdir",
    "control_steps",
    "excited_sources",
    "format_number",
    "render_deck",
    "save_key",
    "strip_end",
]

TEMPLATE_DIR = Path(__file__).resolve().parent.parent / "templates"
MAX_COMMAND_CHARS = 900  # ngspice's shared API takes at most 1023 characters a command

StepKind = Literal["op", "ac", "alter", "let", "save", "write", "free", "set"]


@dataclass(frozen=True, slots=True)
class Step:
    """One control-block command; ``run_index``/``sweep_index`` say which run an ``ac`` or ``write`` serves."""

    command: str
    kind: StepKind
    run_index: int = -1
    sweep_index: int = -1


@lru_cache(maxsize=1)
def _deck_template() -> jinja2.Template:
    """The deck's template, read once a process: jinja2 otherwise looks at the file's modification time on every deck
    (render_deck 0.18 -> 0.12 ms a load in the ngspice process, timed in place while 74 sky130 mismatch samples'
    recorded jobs ran, medians of 3 runs taken in turns). The template is part of the package, as its code is."""
    environment = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(TEMPLATE_DIR)),
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
        autoescape=False,
    )
    return environment.get_template("sim_deck.cir.j2")


def format_number(value: float) -> str:
    """A float as ngspice reads it back exactly (shortest round-trip repr); rejects inf and nan."""
    value = float(value)
    if not math.isfinite(value):
        raise SimulationError(f"cannot pass the non-finite number {value!r} to ngspice")
    return repr(value)


_END = re.compile(r"^\s*\.end\s*$", re.IGNORECASE)


def strip_end(netlist: str) -> str:
    """The netlist without a trailing ``.end`` line (the deck adds its own) and without trailing blanks."""
    lines = netlist.rstrip().splitlines()
    while lines and _END.match(lines[-1]):
        lines.pop()
        while lines and not lines[-1].strip():
            lines.pop()
    return "\n".join(lines)


def save_key(name: str) -> str:
    """How a saved vector is named in results: the request, lower-case, without blanks."""
    return "".join(name.split()).lower()


def excited_sources(job: SimJob) -> tuple[str, ...]:
    """Every source some run may excite: ``job.excitable`` then any other name a run sets, lower-case."""
    names: list[str] = []
    for name in (*job.excitable, *(n for run in job.runs for n in run.ac)):
        key = name.strip().lower()
        if key and key not in names:
            names.append(key)
    return tuple(names)


def _sweep_command(sweep: AcSweep) -> str:
    problem = sweep_problem(sweep)
    if problem:
        raise SimulationError(f"bad ac sweep {sweep}: {problem}")
    return f"ac {sweep.kind} {int(sweep.points)} {format_number(sweep.fstart_hz)} {format_number(sweep.fstop_hz)}"


def _chunked(prefix: str, words: tuple[str, ...]) -> list[str]:
    commands, current = [], prefix
    for word in words:
        if current != prefix and len(current) + 1 + len(word) > MAX_COMMAND_CHARS:
            commands.append(current)
            current = prefix
        current += " " + word
    if current != prefix:
        commands.append(current)
    return commands


def raw_name(run_index: int, sweep_index: int) -> str:
    """File name of the raw file batch mode writes for one sweep of one run."""
    return f"run{run_index}_sweep{sweep_index}.raw"


def _raw_path(name: str, raw_dir: str | None) -> str:
    return name if raw_dir is None else str(Path(raw_dir) / name)


OP_RAW = "op.raw"
PARAMS_RAW = "params.raw"  # batch mode: the loaded values of the job's altered parameters
_PARAMETER_WORD = re.compile(r"^[a-z0-9_.#:$+-]+$")


def alter_vector(index: int) -> str:
    """The ngspice vector that holds the loaded value of a job's ``index``-th altered parameter."""
    return f"netloop_alter_{index}"


def _alter_steps(alters: tuple[Alter, ...], write_raw: bool, raw_dir: str | None) -> tuple[list[Step], list[Step]]:
    """(steps that keep each parameter's loaded value and change it, steps that put it back)."""
    change: list[Step] = []
    restore: list[Step] = []
    for i, alter in enumerate(alters):
        for word in (alter.device.strip().lower(), alter.parameter.strip().lower()):
            if not _PARAMETER_WORD.match(word):
                raise SimulationError(f"cannot alter {alter.ref!r}: {word!r} is not a device or parameter name")
        change.append(Step(f"let {alter_vector(i)} = {alter.ref}", "let"))
        change.append(Step(f"alter {alter.ref} = {alter_vector(i)} * {format_number(alter.scale)}", "alter"))
        restore.append(Step(f"alter {alter.ref} = {alter_vector(i)}", "alter"))
    if write_raw and alters:
        names = " ".join(alter_vector(i) for i in range(len(alters)))
        change.append(Step(f"write {_raw_path(PARAMS_RAW, raw_dir)} {names}", "write"))
    return change, restore


def control_steps(job: SimJob, write_raw: bool, raw_dir: str | None = None) -> tuple[Step, ...]:
    """The control commands of a job: op once, the job's alters, then per run the AC magnitudes and
    its sweeps, and last the altered parameters put back.

    ``write_raw`` adds the ``write`` commands batch mode needs: binary raw files in ``raw_dir``
    (an absolute folder), or in ngspice's current folder when that is None.
    """
    steps: list[Step] = [Step(f"set num_threads={NGSPICE_THREADS}", "set")]
    if write_raw:
        steps.append(Step("set filetype=binary", "set"))
    steps.append(Step("op", "op"))
    if write_raw:
        steps.append(Step(f"write {_raw_path(OP_RAW, raw_dir)}", "write"))
    steps.append(Step("destroy all", "free"))
    saves = tuple(save_key(s) for s in job.save)
    steps.extend(Step(c, "save") for c in _chunked("save", saves))
    change, restore = _alter_steps(job.alters, write_raw, raw_dir)
    steps.extend(change)
    sources = excited_sources(job)
    for r, run in enumerate(job.runs):
        ac = {k.strip().lower(): v for k, v in run.ac.items()}
        for source in sources:
            steps.append(Step(f"alter {source} ac = {format_number(ac.get(source, 0.0))}", "alter", r))
        for s, sweep in enumerate(run.sweeps):
            steps.append(Step(_sweep_command(sweep), "ac", r, s))
            if write_raw:
                steps.append(Step(f"write {_raw_path(raw_name(r, s), raw_dir)}", "write", r, s))
            steps.append(Step("destroy all", "free", r, s))
    steps.extend(restore)
    return tuple(steps)


def check_workdir(job: SimJob) -> None:
    """Refuse a job whose ``workdir`` is not an existing folder."""
    if job.workdir is not None and not Path(job.workdir).is_dir():
        raise SimulationError(f"the job's workdir {job.workdir!r} is not a folder", corner=job.label or None)


def render_deck(job: SimJob, option_words: tuple[str, ...], steps: tuple[Step, ...] = ()) -> str:
    """The deck text: netlist, ``.option`` lines for ``option_words``, a control block of ``steps``."""
    return _deck_template().render(netlist=strip_end(job.netlist), option_words=option_words, steps=steps, workdir=job.workdir or "")
