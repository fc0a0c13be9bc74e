"""The batch backend: ``ngspice -b`` on a rendered deck, results read back from binary raw files."""

from __future__ import annotations

import os
import subprocess
import tempfile
import time
from collections.abc import Mapping
from pathlib import Path

import numpy as np

from netloop.errors import SimulationError, SimulatorUnavailableError
from netloop.sim.backend import NgspiceBackend
from netloop.sim.convergence import aid_ladder, describe_aid, option_words
from netloop.sim.deck import OP_RAW, PARAMS_RAW, alter_vector, control_steps, raw_name, render_deck, save_key
from netloop.sim.frequency import merge_sweeps
from netloop.sim.job import RunResult, SimJob, SimResult
from netloop.sim.keep import job_error, keep_deck, runnable_deck
from netloop.sim.library import find_ngspice_binary
from netloop.sim.output import fatal_lines, op_failed, recovery, summary, tail
from netloop.sim.rawfile import RawPlot, read_raw
from netloop.sim.vectors import unknown_saves

__all__ = ["BatchSimulator"]


class BatchSimulator(NgspiceBackend):
    """Runs each job as ``ngspice -b deck.cir``, the deck and its raw files in a temporary folder,
    ngspice itself in the job's ``workdir`` (or the current folder) so relative includes resolve.

    ``keep_dir``: keep every deck there (failed decks are always kept, in a temporary folder if no
    ``keep_dir`` is given).
    """

    backend = "ngspice-batch"

    def __init__(self, binary: str | None = None, keep_dir: str | os.PathLike[str] | None = None):
        path = binary or find_ngspice_binary()
        if path is None:
            raise SimulatorUnavailableError("the ngspice program was not found on PATH")
        self.binary = path
        self.keep_dir = keep_dir

    def close(self) -> None:
        """Nothing to stop (each job is its own process); here so both backends read alike."""

    def run(self, job: SimJob) -> SimResult:
        self.refuse_malformed(job)
        deadline = time.monotonic() + job.timeout_s
        tried: list[str | None] = []
        said = ""
        log: list[str] = []
        spent: list[float] = []  # each ngspice process's wall time for this job (SimResult.ngspice_seconds)
        for aid in aid_ladder(job):
            tried.append(aid)

            def failure(message: str, aid: str | None = aid) -> SimulationError:
                return job_error(job, "analysis", message, "\n".join(log), runnable_deck(job, aid), self.keep_dir)

            with tempfile.TemporaryDirectory(prefix="netloop-batch-") as work:
                deck = render_deck(job, option_words(job, aid), control_steps(job, write_raw=True, raw_dir=work))
                lines = self._ngspice(job, deck, Path(work), deadline, failure, spent)
                log.extend(lines)
                op = _op_plot(Path(work) / OP_RAW)
                if op is None:
                    if op_failed(lines):
                        said = summary(lines)
                        continue
                    raise failure("ngspice could not read the netlist or run the deck: " + (summary(lines) or tail(lines, 6).replace("\n", " | ")))
                missing = unknown_saves(job.save, op.names)
                fatal = fatal_lines(lines)  # not those ngspice prints while it iterates: the analyses' data decide those
                if missing or fatal:  # e.g. 'alter' of a source the circuit lacks: ngspice goes on regardless
                    raise failure(missing or "ngspice reported errors: " + " | ".join(dict.fromkeys(fatal)))
                runs = tuple(self._run(job, r, Path(work), lines, failure) for r in range(len(job.runs)))
                parameters = _parameters(job, Path(work) / PARAMS_RAW, failure)
            return SimResult(
                runs=runs,
                operating_point=_node_voltages(op),
                log="\n".join(log),
                deck_path=keep_deck(runnable_deck(job, aid), job.label, self.keep_dir) if self.keep_dir is not None else None,
                convergence_aid=describe_aid(aid, recovery(lines)),
                backend=self.backend,
                parameters=parameters,
                ngspice_seconds=sum(spent),
            )
        raise job_error(job, "op", said, "\n".join(log), runnable_deck(job, tried[-1]), self.keep_dir, tried)

    def _ngspice(self, job: SimJob, deck: str, work: Path, deadline: float, failure, spent: list[float]) -> list[str]:
        """Run ngspice -b on ``deck`` (written into ``work``) from the job's folder; its output lines. Its wall time is
        added to ``spent``."""
        (work / "deck.cir").write_text(deck, encoding="utf-8")
        try:
            remaining = deadline - time.monotonic()
            if remaining <= 0:
                raise subprocess.TimeoutExpired(self.binary, job.timeout_s)
            started = time.perf_counter()
            done = subprocess.run(
                [self.binary, "-b", str(work / "deck.cir")],
                cwd=job.workdir or os.getcwd(),  # where relative .include/.lib paths are read from
                stdin=subprocess.DEVNULL,
                stdout=subprocess.PIPE,
                stderr=subprocess.STDOUT,
                timeout=remaining,
                check=False,
            )
        except subprocess.TimeoutExpired as exc:
            raise failure(f"ngspice did not finish within the timeout of {job.timeout_s:g} s and was stopped") from exc
        except OSError as exc:
            raise SimulatorUnavailableError(f"cannot run {self.binary}: {exc}") from exc
        spent.append(time.perf_counter() - started)
        lines = done.stdout.decode("utf-8", errors="replace").splitlines()
        # ngspice -b exits 1 after a deck whose analyses are all in .control, so only a signal
        # (a crash) is judged from the return code; failures are judged from its error lines.
        if done.returncode < 0:
            raise failure(f"ngspice crashed (signal {-done.returncode}): {tail(lines, 6)}")
        return lines

    def _run(self, job: SimJob, r: int, work: Path, lines: list[str], failure) -> RunResult:
        """Run ``r`` of ``job``: its sweeps read from their raw files and merged."""
        run = job.runs[r]
        parts = []
        for s, _ in enumerate(run.sweeps):
            plot = _first_plot(work / raw_name(r, s))
            if plot is None or "frequency" not in plot.data or plot.data["frequency"].size == 0:
                raise failure(f"ngspice's ac analysis of run {run.name!r} failed: {summary(lines) or 'no error message'}")
            vectors = {}
            for key in (save_key(name) for name in job.save):
                data = plot.data.get(_raw_key(key))
                if data is None:
                    raise failure(f"ngspice has no vector {key!r} (this run has: {', '.join(plot.names)})")
                vectors[key] = np.asarray(data, dtype=np.complex128)
            parts.append((np.real(plot.data["frequency"]).astype(float), vectors))
        freq, vectors = merge_sweeps(parts)
        return RunResult(name=run.name, freq_hz=freq, vectors=vectors)

    def operating_point(self, netlist: str) -> Mapping[str, float]:
        """Every node voltage of ``netlist``'s operating point (lower-case, hierarchical as ngspice names them)."""
        return self.run(SimJob(netlist=netlist, runs=(), save=())).operating_point


def _first_plot(path: Path) -> RawPlot | None:
    if not path.is_file() or path.stat().st_size == 0:
        return None
    plots = read_raw(path)
    return plots[0] if plots else None


def _op_plot(path: Path) -> RawPlot | None:
    plot = _first_plot(path)
    if plot is None or not plot.names or plot.data[plot.names[0]].size == 0:
        return None
    return plot


def _parameters(job: SimJob, path: Path, failure) -> dict[str, float]:
    """The loaded value of each parameter ``job`` altered, from the raw file its deck wrote."""
    if not job.alters:
        return {}
    plot = _first_plot(path)
    found = {name.lower(): data for name, data in plot.data.items()} if plot is not None else {}
    out = {}
    for i, alter in enumerate(job.alters):
        data = found.get(alter_vector(i), found.get(f"v({alter_vector(i)})"))
        if data is None or data.size < 1:
            raise failure(f"ngspice gave no value for {alter.ref}")
        out[alter.ref] = float(np.real(data[0]))
    return out


def _raw_key(key: str) -> str:
    """The name a saved vector has in a raw file: ngspice writes nodes as v(x) and branches as i(x)."""
    if key.endswith("#branch"):
        return f"i({key[: -len('#branch')]})"
    if "(" not in key:
        return f"v({key})"
    return key


def _node_voltages(plot: RawPlot) -> dict[str, float]:
    out = {}
    # ngspice 39's 'write' of a plot holding a single vector adds a copy of it named "all".
    phantom = "v(all)" if len(plot.names) == 2 and plot.names[1] == "v(all)" else None
    for name, kind in zip(plot.names, plot.types):
        if kind != "voltage" or "#" in name or name == phantom:
            continue
        node = name[2:-1] if name.startswith("v(") and name.endswith(")") else name
        out[node] = float(np.real(plot.data[name][0]))
    return out
