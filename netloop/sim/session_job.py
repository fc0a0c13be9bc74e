"""Run one SimJob in an ngspice session: load, operating point (with aids), then each AC run."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from netloop.sim.convergence import aid_ladder, describe_aid, option_words
from netloop.sim.deck import control_steps, render_deck, save_key
from netloop.sim.frequency import merge_sweeps
from netloop.sim.job import SimJob
from netloop.sim.output import error_lines, ngspice_fallback, op_failed, summary, tail
from netloop.sim.session import NgspiceSession
from netloop.sim.vectors import unknown_saves

__all__ = ["JobFailure", "JobPayload", "run_job"]


@dataclass(slots=True)
class JobPayload:
    """What a finished job sends back: plain data only (it crosses a process boundary)."""

    operating_point: dict[str, float]
    runs: list[tuple[str, np.ndarray, dict[str, np.ndarray]]]
    log: str
    aid: str | None  # our aid (option words) in the deck, if one was needed
    found_by: str | None  # what SimResult.convergence_aid says


@dataclass(slots=True)
class JobFailure(Exception):
    """A job ngspice could not do: ``kind`` is "netlist", "op" or "analysis"."""

    kind: str
    message: str
    output: str = ""
    aid: str | None = None
    tried: tuple[str | None, ...] = field(default_factory=tuple)

    def __str__(self) -> str:
        return self.message


def run_job(session: NgspiceSession, job: SimJob) -> JobPayload:
    """Do ``job`` in ``session``; raises JobFailure with ngspice's own lines when it cannot."""
    log: list[str] = []
    tried: list[str | None] = []

    def failure(kind: str, message: str) -> JobFailure:
        session.clear()
        return JobFailure(kind, message, tail(log, 60), tried[-1] if tried else None, tuple(tried))

    op_lines: list[str] = []
    for aid in aid_ladder(job):
        tried.append(aid)
        session.clear()
        loaded = session.load(render_deck(job, option_words(job, aid)))
        log.extend(loaded)
        if error_lines(loaded):
            raise failure("netlist", "ngspice could not read the netlist: " + summary(loaded))
        op_lines = session.command("op")
        log.extend(op_lines)
        plot = session.current_plot()
        voltages = session.node_voltages(plot) if plot.startswith("op") else {}
        if not op_failed(op_lines) and not error_lines(op_lines) and (voltages or not _has_nodes(session, plot)):
            break
    else:
        raise failure("op", summary(op_lines))
    missing = unknown_saves(job.save, session.vector_names(plot))
    if missing:
        raise failure("netlist", missing)
    session.command("destroy all")

    saves = tuple(save_key(s) for s in job.save)
    parts: dict[int, list] = {r: [] for r in range(len(job.runs))}
    for step in control_steps(job, write_raw=False):
        if step.kind in ("op", "free"):
            continue  # the operating point is done; plots are freed below, once read
        lines = session.command(step.command)
        log.extend(lines)
        if error_lines(lines):
            raise failure("analysis", f"'{step.command}' failed: " + summary(lines))
        if step.kind != "ac":
            continue
        plot = session.current_plot()
        freq = session.vector(plot, "frequency")
        if not plot.startswith("ac") or freq is None or freq.size == 0:
            raise failure("analysis", f"'{step.command}' produced no data")
        vectors = {}
        for key in saves:
            data = session.vector(plot, key)
            if data is None:
                known = ", ".join(sorted(session.vector_names(plot)))
                raise failure("analysis", f"ngspice has no vector {key!r} (this run has: {known})")
            vectors[key] = np.asarray(data, dtype=np.complex128)
        parts[step.run_index].append((np.real(freq).astype(float), vectors))
        session.command("destroy all")
    runs = [(run.name, *merge_sweeps(parts[r])) for r, run in enumerate(job.runs)]
    session.clear()
    return JobPayload(operating_point=voltages, runs=runs, log="\n".join(log), aid=aid, found_by=describe_aid(aid, ngspice_fallback(op_lines)))


def _has_nodes(session: NgspiceSession, plot: str) -> bool:
    return any("#" not in n for n in session.vector_names(plot))
