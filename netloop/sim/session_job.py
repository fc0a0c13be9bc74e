"""Run SimJobs in an ngspice session: load, operating point (with aids), then each AC run.

A JobRunner keeps the circuit of its last successful job loaded: a next job of the same measurement
(same non-empty ``circuit_id``) on the very same circuit (netlist text, options, folder, saves and
excited sources all equal; only the sweeps differ, as in the widening and refinement rounds) skips
the load and the operating point and runs its sweeps at once. A job that names values ngspice can
change in place (SimJob.changes; netloop.sim.in_place) runs on the circuit an earlier job left loaded
when the two netlists differ only in those values: ngspice changes them instead of reading the netlist
and its model files again. ngspice reads only the model cards and subcircuits of its libraries that the
circuit uses (netloop.sim.used_models).
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass, field

import numpy as np

from netloop.sim.convergence import aid_ladder, describe_aid, option_words
from netloop.sim.deck import Step, alter_vector, control_steps, excited_sources, render_deck, save_key
from netloop.sim.frequency import merge_rows
from netloop.sim.in_place import change_commands, explained, values_of
from netloop.sim.job import SimJob
from netloop.sim.frequency import sweep_frequencies
from netloop.sim.output import ac_op_failed, error_lines, fatal_among, fatal_lines, op_failed, recovery, summary
from netloop.sim.session import NgspiceSession
from netloop.sim.used_models import used_pieces
from netloop.sim.vectors import unknown_saves

__all__ = ["JobFailure", "JobPayload", "JobRunner", "run_job"]


@dataclass(slots=True)
class JobPayload:
    """What a finished job sends back: plain data only (it crosses a process boundary)."""

    operating_point: dict[str, float]
    runs: list[tuple[str, np.ndarray, np.ndarray]]  # (name, frequencies, the vectors of SimJob.save as rows, in its order)
    log: str
    aid: str | None  # our aid (option words) in the deck, if one was needed
    found_by: str | None  # what SimResult.convergence_aid says
    parameters: dict[str, float] = field(default_factory=dict)  # SimResult.parameters
    loaded: bool = True  # SimResult.loaded: ngspice read the netlist for this job
    ngspice_seconds: float = 0.0  # SimResult.ngspice_seconds


@dataclass(slots=True)
class JobFailure(Exception):
    """A job ngspice could not do: ``kind`` is "netlist", "op" or "analysis"."""

    kind: str
    message: str
    output: str = ""  # ngspice's whole output for the job
    aid: str | None = None
    tried: tuple[str | None, ...] = field(default_factory=tuple)

    def __str__(self) -> str:
        return self.message


@dataclass(slots=True)
class _Loaded:
    """The circuit a session holds, what it was loaded for, and what its operating point gave."""

    key: tuple
    aid: str | None
    voltages: dict[str, float] = field(default_factory=dict)
    found_by: str | None = None
    log: tuple[str, ...] = ()
    op_done: bool = False  # the operating point is known to converge with this circuit and aid
    netlist: str = ""  # the netlist text the circuit stands for now (as loaded, or as changed in place)
    values: dict[tuple[str, str], str] = field(default_factory=dict)  # its in-place changeable values (SimJob.changes)
    saves_set: bool = True  # the job's saves are given to ngspice (a reset drops them)
    slot: int = 0  # which load this circuit came from, in order (kept when it is changed in place)
    label: str = ""  # the label of the last job that ran on it (a corner's name)


def circuit_key(job: SimJob) -> tuple:
    """What must be equal for two jobs to run on one loaded circuit (everything but the sweeps)."""
    saves = tuple(save_key(s) for s in job.save)
    return (job.circuit_id, job.netlist, tuple(job.options), tuple(job.op_aids), job.workdir, saves, excited_sources(job), job.op_voltages)


def _changeable(loaded: _Loaded, job: SimJob, key: tuple) -> bool:
    """True when ``job`` may run on ``loaded`` once its SimJob.changes are made in place: it names the
    same values, everything but the id and the netlist is equal, the netlists differ only in those
    values, and the circuit was loaded without a convergence aid and has converged (a fresh load
    would read the same deck)."""
    return (
        bool(job.changes)
        and loaded.aid is None
        and loaded.op_done
        and set(loaded.values) == {c.key for c in job.changes}
        and loaded.key[2:] == key[2:]
        and explained(loaded.netlist, job.netlist, job.changes)
    )


KEEP_MAX_CHARS = 400_000  # a circuit is kept loaded beside the next one only when its netlist is this small (memory)


def _resets(job: SimJob, loaded: _Loaded) -> bool:
    """True when changing ``loaded`` to ``job`` needs ngspice's ``reset`` (a parameter changes): ngspice evaluates the
    parameters again from the state its netlist reader keeps for the circuit it read last, so only the newest
    circuit may take one."""
    try:
        return change_commands(job.changes, loaded.values)[1]
    except ValueError:
        return True


class JobRunner:
    """Runs jobs one after the other in ``session``, reusing the loaded circuit where it can.

    ngspice holds up to two circuits: the one the last job ran on, and one before it when that is small
    (KEEP_MAX_CHARS): the first loaded of those whose last job had the new job's label (a corner's name), else the
    current one. A job for the older one (the same measurement, or values it can change in place) switches back to it
    (``setcirc``) instead of loading it again: a corner whose split was doubted measures other splits on circuits of
    their own, one after the other, and the next corner still finds its own circuit loaded."""

    def __init__(self, session: NgspiceSession):
        self.session = session
        self._loaded: _Loaded | None = None  # the circuit ngspice works on now
        self._held: list[_Loaded] = []  # every circuit ngspice holds, in its own order (the newest is number 1)
        self._loads = 0

    def run(self, job: SimJob) -> JobPayload:
        """Do ``job``; raises JobFailure with ngspice's own lines when it cannot."""
        start = self.session.seconds
        payload = self._run_job(job)
        payload.ngspice_seconds = self.session.seconds - start
        return payload

    def _run_job(self, job: SimJob) -> JobPayload:
        key = circuit_key(job)
        current, self._loaded = self._loaded, None
        if len(self._held) > 1 and self._count() != len(self._held):  # never expected: then trust none of them
            self.forget()
            current = None
        target, same = None, False
        for held in sorted(self._held, key=lambda h: h is not current):  # the current circuit first
            if job.circuit_id and held.key == key:
                target, same = held, True
                break
            if _changeable(held, job, key) and (self._held.index(held) == 0 or not _resets(job, held)):
                target = held
                break
        if target is not None and target is not current:
            self.session.command("destroy all")
            self.session.command(f"setcirc {self._held.index(target) + 1}")
        loaded = target if same else None
        if target is not None and not same:
            loaded = self._change_in_place(target, job, key)
            if loaded is None:
                self._remove(target)  # refused part-way: its values are no longer known
            else:
                loaded.slot = target.slot
                self._held[self._held.index(target)] = loaded
        if loaded is None:
            keep = self._worth_keeping(job, target or current)
            for held in list(self._held):
                if held is not keep or len(held.netlist) > KEEP_MAX_CHARS:
                    self._remove(held)
            self.session.command("destroy all")
        try:
            payload, record = _run(self.session, job, key, loaded)
        except JobFailure as failure:
            self.forget()
            if loaded is None or same or failure.kind != "op":
                raise
            return self.run_fresh(job)  # changed in place, the operating point failed: as a fresh load would go
        if loaded is None:
            self._loads += 1
            record.slot = self._loads
            self._held.insert(0, record)
            if len(self._held) > 1 and self._count() != len(self._held):  # never expected: keep only the new one
                for held in self._held[1:]:
                    self._remove(held)
        record.label = job.label
        self._loaded = record
        return payload

    def _worth_keeping(self, job: SimJob, current: _Loaded | None) -> _Loaded | None:
        """Which held circuit to keep beside the one loaded for ``job``: of those whose last job had ``job``'s label
        (the same corner), the first loaded (the corner's own circuit, not another split measured after it), else
        ``current``."""
        same = [h for h in self._held if job.label and h.label == job.label]
        return min(same, key=lambda h: h.slot) if same else current

    def _count(self) -> int:
        """How many circuits ngspice holds, as its ``setcirc`` lists them."""
        return sum(1 for line in self.session.command("setcirc") if re.match(r"^(?:current\s+)?\d+\s", line.strip(), re.IGNORECASE))

    def run_fresh(self, job: SimJob) -> JobPayload:
        """Do ``job`` on a circuit loaded for it (its convergence aids tried in order)."""
        self.forget()
        try:
            payload, record = _run(self.session, job, circuit_key(job), None)
        except JobFailure:
            self.forget()
            raise
        self._loads += 1
        record.slot, record.label = self._loads, job.label
        self._held, self._loaded = [record], record
        return payload

    def _remove(self, held: _Loaded) -> None:
        """Take one circuit out of ngspice (the current one is then the newest left)."""
        self.session.command(f"setcirc {self._held.index(held) + 1}")
        self.session.clear()
        self._held.remove(held)
        if self._loaded is held:
            self._loaded = None

    def _change_in_place(self, loaded: _Loaded, job: SimJob, key: tuple) -> _Loaded | None:
        """The loaded circuit with the job's changes made in place, or None when ngspice refused them."""
        try:
            commands, saves_dropped = change_commands(job.changes, loaded.values)  # a reset drops the saves
        except ValueError:
            return None
        log = list(loaded.log)
        for command in commands:
            lines = self.session.command(command)
            log.extend(lines)
            if error_lines(lines):
                return None
        if job.op_voltages and not saves_dropped:
            self.session.command("delete all")  # the saves: the operating point below keeps every node voltage, as on a fresh load
            saves_dropped = True
        self.session.command("destroy all")
        changed = _Loaded(key, None, log=tuple(log), netlist=job.netlist, values=values_of(job.changes), saves_set=not saves_dropped)

        def failure(kind: str, message: str) -> JobFailure:
            return JobFailure(kind, message, "\n".join(log))

        try:
            return _operating_point(self.session, job, changed, log, failure)[0]
        except JobFailure:
            return None

    def forget(self) -> None:
        """Remove every loaded circuit (the next job loads its own)."""
        self.session.clear()
        for _ in range(8):  # whatever a failed load may have left too
            if not self._count():
                break
            self.session.clear()
        self._held, self._loaded = [], None


def run_job(session: NgspiceSession, job: SimJob) -> JobPayload:
    """Do ``job`` in ``session`` and leave no circuit behind; raises JobFailure when ngspice cannot."""
    runner = JobRunner(session)
    try:
        return runner.run(job)
    finally:
        runner.forget()


def _run(session: NgspiceSession, job: SimJob, key: tuple, loaded: _Loaded | None) -> tuple[JobPayload, _Loaded]:
    log: list[str] = list(loaded.log) if loaded is not None else []
    tried: list[str | None] = []

    def failure(kind: str, message: str) -> JobFailure:
        return JobFailure(kind, message, "\n".join(log), tried[-1] if tried else None, tuple(tried))

    steps = control_steps(job, write_raw=False)
    ladder = aid_ladder(job) if loaded is None else (loaded.aid,)
    said: list[str] = []
    for aid in ladder:
        tried.append(aid)
        fresh = loaded is None
        if fresh:
            loaded, said = _load(session, job, key, aid, log, failure)
            if loaded is None:
                continue  # the operating point failed: next aid
        parts, ac_lines, parameters, later = _sweeps(session, job, steps, log, failure, saves_set=not fresh and loaded.saves_set)
        if parts is None:  # the first ac's own operating point failed
            if not fresh:
                raise failure("op", summary(ac_lines))
            said = ac_lines
            session.clear()
            loaded = None
            continue
        loaded.saves_set = True
        if not loaded.op_done:
            loaded.found_by = describe_aid(aid, recovery(ac_lines))
            loaded.op_done = True
        runs = [(run.name, *merge_rows(parts[r])) for r, run in enumerate(job.runs)]
        found_by = loaded.found_by or later  # a later sweep ngspice finished only after recovering says so too
        payload = JobPayload(dict(loaded.voltages), runs, "\n".join(log), aid, found_by, parameters, loaded=fresh)
        return payload, loaded
    raise failure("op", summary(said))


def _load(session: NgspiceSession, job: SimJob, key: tuple, aid: str | None, log: list[str], failure) -> tuple[_Loaded | None, list[str]]:
    """Load the circuit with ``aid`` beside those ngspice holds; with ``job.op_voltages`` also run its operating point.

    Returns (None, ngspice's lines) when the operating point failed (that circuit taken out again), else the loaded record.
    """
    deck = render_deck(job, option_words(job, aid))
    lean = used_pieces(deck, os.getcwd())  # the worker runs in the job's folder, where relative library paths start
    loaded_lines = session.load(lean or deck)
    errors = error_lines(loaded_lines)
    if lean is not None and errors:  # never expected: then ngspice reads the libraries as written
        session.clear()
        loaded_lines = session.load(deck)
        errors = error_lines(loaded_lines)
    log.extend(loaded_lines)
    if errors:
        raise failure("netlist", "ngspice could not read the netlist: " + summary(loaded_lines))
    record = _Loaded(key, aid, log=tuple(log), netlist=job.netlist, values=values_of(job.changes), saves_set=False)
    loaded, lines = _operating_point(session, job, record, log, failure)
    if loaded is None:
        session.clear()  # the circuit whose operating point failed; the next aid loads its own
    return loaded, lines


def _operating_point(session: NgspiceSession, job: SimJob, record: _Loaded, log: list[str], failure) -> tuple[_Loaded | None, list[str]]:
    """With ``job.op_voltages`` run the loaded circuit's operating point and keep its node voltages in
    ``record``; without, leave it to the first ac. (None, ngspice's lines) when it failed."""
    if not job.op_voltages and job.runs:
        return record, []  # the first ac computes the operating point
    op_lines = session.command("op")
    log.extend(op_lines)
    plot = session.current_plot()
    voltages = session.node_voltages(plot) if plot.startswith("op") else {}
    # judged by what the op produced: error lines ngspice printed while it iterated, and then recovered from, do not count
    if op_failed(op_lines) or fatal_lines(op_lines) or not (voltages or not _has_nodes(session, plot)):
        return None, op_lines
    missing = unknown_saves(job.save, session.vector_names(plot))
    if missing:
        raise failure("netlist", missing)
    session.command("destroy all")
    record.voltages = voltages
    record.found_by = describe_aid(record.aid, recovery(op_lines))
    record.op_done = True
    record.log = tuple(log)
    return record, op_lines


def _sweeps(session: NgspiceSession, job: SimJob, steps: tuple[Step, ...], log: list[str], failure, saves_set: bool):
    """Run the job's saves, alters and sweeps; returns ({run: parts}, first ac's lines, the loaded value
    of each altered parameter, how ngspice recovered in a later sweep or None), or (None, lines, {}, None) when the
    first ac's own operating point failed. An ac that printed error lines while it iterated but finished every point
    counts as done (its data and vectors exist): ngspice recovered."""
    saves = tuple(save_key(s) for s in job.save)
    parts: dict[int, list] = {r: [] for r in range(len(job.runs))}
    parameters: dict[str, float] = {}
    first_ac: list[str] | None = None
    recovered: list[str | None] = []
    for step in steps:
        if step.kind in ("op", "free") or (step.kind == "save" and saves_set):
            continue  # the operating point is done; plots are freed below, once read; saves stay set
        lines = session.command(step.command)
        log.extend(lines)
        if step.kind == "ac" and first_ac is None:
            first_ac = lines
            if ac_op_failed(lines) or op_failed(lines):
                return None, lines, {}, None
        errors = error_lines(lines)  # read once: ngspice prints some 20 lines an ac while it finds the operating point
        if (fatal_among(errors) if step.kind == "ac" else errors):
            raise failure("analysis", f"'{step.command}' failed: " + summary(lines))
        if step.kind == "let":  # the loaded value of the job's next altered parameter
            alter = job.alters[len(parameters)]
            value = session.vector(session.current_plot(), alter_vector(len(parameters)))
            if value is None or value.size != 1:
                raise failure("analysis", f"ngspice gave no value for {alter.ref}")
            parameters[alter.ref] = float(np.real(value[0]))
        if step.kind != "ac":
            continue
        plot = session.current_plot()
        freq = session.vector(plot, "frequency")
        if not plot.startswith("ac") or freq is None or freq.size == 0:
            raise failure("analysis", f"'{step.command}' produced no data" + (f": {summary(lines)}" if summary(lines) else ""))
        if errors and freq.size != sweep_frequencies(job.runs[step.run_index].sweeps[step.sweep_index]).size:
            raise failure("analysis", f"'{step.command}' stopped after {freq.size} point(s): " + summary(lines))
        if errors and lines is not first_ac:
            recovered.append(recovery(lines))  # finished regardless: what ngspice recovered from
        rows = session.rows(plot, saves, freq.size)
        if rows is None:
            key = next(key for key in saves if session.vector(plot, key) is None)
            known = ", ".join(sorted(session.vector_names(plot)))
            raise failure("analysis", f"ngspice has no vector {key!r} (this run has: {known})")
        parts[step.run_index].append((np.real(freq).astype(float), rows))
        session.command("destroy all")
    return parts, first_ac or [], parameters, next((r for r in recovered if r), None)


def _has_nodes(session: NgspiceSession, plot: str) -> bool:
    return any("#" not in n for n in session.vector_names(plot))
