"""Operating-point convergence aids: the ladder tried after a failure, and the error when all fail."""

from __future__ import annotations

from collections.abc import Sequence

from netloop.errors import SimulationError
from netloop.sim.diagnostics import Diagnosis
from netloop.sim.job import SimJob

__all__ = ["DEFAULT_OP_AIDS", "aid_ladder", "describe_aid", "op_failure", "option_words"]

# Tried in order, each on its own on top of the job's options. ngspice 39 already does plain Newton,
# dynamic gmin stepping, source stepping and a transient operating point by default; these switch
# to the other algorithms and limits it has: gminsteps/srcsteps > 1 select the fixed ladders
# (ngspice 39 then prints "Starting spice3 gmin stepping"), and a later .option overrides the
# netlist's own (tests/sim/test_convergence.py shows a netlist that needs "gminsteps=100").
DEFAULT_OP_AIDS: tuple[str, ...] = (
    "itl1=1000",
    "gminsteps=100",
    "srcsteps=100",
    "itl1=1000 gminsteps=200 srcsteps=200",
)

HELP = (
    "options that usually help: '.option gminsteps=100' (fixed gmin ladder), '.option srcsteps=100' "
    "(source stepping), '.option itl1=1000' (more Newton iterations), a '.nodeset' near the expected "
    "solution, or a DC path to ground at every node"
)


def aid_ladder(job: SimJob) -> tuple[str | None, ...]:
    """None (ngspice as the netlist says) then each aid: the job's own, or the defaults."""
    return (None, *(job.op_aids or DEFAULT_OP_AIDS))


def describe_aid(aid: str | None, fallback: str | None) -> str | None:
    """SimResult.convergence_aid: our aid (as the job or DEFAULT_OP_AIDS spell it), else ngspice's own
    fallback ("ngspice: transient operating point"), else None when plain Newton converged."""
    return aid or fallback


def option_words(job: SimJob, aid: str | None) -> tuple[str, ...]:
    """The ``.option`` words of one attempt: the job's options, then the aid's (later ones win)."""
    return (*job.options, *(aid.split() if aid else ()))


def op_failure(job: SimJob, tried: Sequence[str | None], ngspice_says: str, deck_path: str | None, simulator_output: str,
               diagnoses: Sequence[Diagnosis] = (), log_path: str | None = None) -> SimulationError:
    """The error raised when no attempt found an operating point: ngspice's own diagnosis first (when it named a
    structural cause, such as a floating node or sources in parallel, the convergence advice is left out: no aid
    can help), then what was tried, the usual remedies and ngspice's error lines; ``simulator_output``: the last lines of
    ngspice's output, which travel with it."""
    aids = [a for a in tried if a]
    what = "the operating point did not converge"
    if aids:
        what += " (tried ngspice's defaults, then " + ", ".join(f"'.option {a}'" for a in aids) + ")"
    lead = "; ".join(d.text for d in diagnoses)
    if any(d.structural for d in diagnoses):
        message = f"{lead}; so {what}"
    else:
        message = (f"{lead}; " if lead else "") + f"{what}; {HELP}"
    if ngspice_says:
        message += "; ngspice said: " + ngspice_says.replace("\n", " | ")
    return SimulationError(message, deck_path=deck_path, simulator_output=simulator_output, corner=job.label or None, log_path=log_path,
                           cards=tuple(d.card for d in diagnoses if d.card))
