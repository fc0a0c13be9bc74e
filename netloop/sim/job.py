"""What a simulator is asked to do and what it gives back: plain data, no ngspice types."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Literal, Protocol, runtime_checkable

import numpy as np

__all__ = ["AcRun", "AcSweep", "Alter", "Change", "RunResult", "SimJob", "SimResult", "Simulator"]


@dataclass(frozen=True, slots=True)
class AcSweep:
    """An ngspice ``ac`` sweep: ``ac dec|lin POINTS FSTART FSTOP``."""

    kind: Literal["dec", "lin"]
    points: int  # per decade for "dec", in total for "lin"
    fstart_hz: float
    fstop_hz: float


@dataclass(frozen=True, slots=True)
class AcRun:
    """One AC analysis: the AC magnitude of each named source for this run, and the sweeps to run.

    Sources not named keep AC magnitude 0 (every source in SimJob.excitable is set for every run;
    a source outside it keeps the AC value its netlist line gives). Several sweeps in one run are
    simulated one after the other with the same excitation and concatenated in frequency order.
    A source inside a subcircuit is named as ngspice flattens it, e.g. "v.xamp.vin".
    """

    name: str  # a label such as "series" or "shunt"
    ac: Mapping[str, float]  # source name -> AC magnitude
    sweeps: tuple[AcSweep, ...]


@dataclass(frozen=True, slots=True)
class Alter:
    """One device parameter changed for one job: ngspice's ``@device[parameter]`` set to ``scale`` times its loaded value.

    ``device`` is named as ngspice flattens it ("cc", "m.xamp.m1"); ``parameter`` as ngspice names it
    ("capacitance", "resistance", "inductance", "gain", "w", "l", "m"). The change is made once the
    circuit is loaded, before the job's runs, and undone after them: the loaded circuit is left as it
    was, so the jobs of one measurement can each change another parameter on one loaded circuit.
    """

    device: str
    parameter: str
    scale: float = 1.0

    @property
    def ref(self) -> str:
        """ngspice's name of the parameter, lower-case: ``@m.xamp.m1[w]``."""
        return f"@{self.device.strip().lower()}[{self.parameter.strip().lower()}]"


@dataclass(frozen=True, slots=True)
class Change:
    """A value of the job's circuit that ngspice can change on a loaded circuit without reading it again.

    kind "temp": the circuit temperature in degrees C (``target`` empty), as a ``.temp VALUE`` line sets it;
    "source": the DC value of the independent source ``target`` (a V or I element at the top level);
    "param": the top-level ``.param target=VALUE`` (ngspice evaluates every expression that uses it again);
    "element": the value of the top-level resistor, capacitor or inductor ``target`` (the token after its nodes).
    ``value`` is the text the job's netlist holds for it (see SimJob.changes), read as ngspice reads it there.
    """

    kind: Literal["temp", "source", "param", "element"]
    target: str
    value: str

    @property
    def key(self) -> tuple[str, str]:
        """What the change sets, whatever its value."""
        return (self.kind, self.target.strip().lower())


@dataclass(frozen=True, slots=True)
class SimJob:
    """A netlist (no analyses of its own) and the AC runs to do on one shared operating point."""

    netlist: str  # complete netlist text, title line first; no .end, no .control, no analyses
    runs: tuple[AcRun, ...]
    save: tuple[str, ...]  # vectors to keep, ngspice syntax: "v(a)", "i(vprobe)"
    excitable: tuple[str, ...] = ()  # every source whose AC value the runs may set (names as in the netlist)
    options: tuple[str, ...] = ()  # extra ".option" words for this job only, e.g. ("gmin=1e-12",)
    op_aids: tuple[str, ...] = ()  # convergence aids to try in order if the operating point fails
    label: str = ""  # what to call this job in messages (a corner name, a location)
    timeout_s: float = 600.0
    workdir: str | None = None  # folder relative .include/.lib paths are read from; None: the current folder
    # False: the caller does not need SimResult.operating_point, so a backend may let the first AC
    # analysis's own operating point stand in for a separate ``op`` run (one operating point fewer;
    # operating_point is then empty). Convergence aids and errors are the same either way.
    op_voltages: bool = True
    # Jobs of one measurement (its widening and refinement rounds) share a non-empty circuit_id: a job
    # whose id, netlist, options, folder, saves and excitable sources equal the previous job's runs on
    # the circuit that job left loaded, without a new load and operating point. Empty: always loaded
    # afresh (a file the netlist includes may have changed since).
    circuit_id: str = ""
    # Device parameters changed for this job only (see Alter); not part of the circuit a later job may
    # reuse. The operating point in SimResult.operating_point is the circuit's as loaded, without them.
    alters: tuple[Alter, ...] = ()
    # Values the job's netlist already holds (its ``.temp`` line, a source's DC value, a ``.param``) that
    # ngspice can change in place. A job that names them may run on the circuit another job left loaded
    # when the two netlists differ only in the lines of these changes and both name the same ones: ngspice
    # then changes the values in place (``alterparam`` and ``reset``, ``option temp``, ``alter``) instead
    # of reading the netlist and its model files again, with results bit for bit those of a fresh load.
    # Empty: only the jobs of one measurement (circuit_id) share a loaded circuit.
    changes: tuple[Change, ...] = ()


@dataclass(frozen=True, slots=True)
class RunResult:
    """The vectors of one AC run, sampled at ``freq_hz`` (ascending)."""

    name: str
    freq_hz: np.ndarray
    vectors: Mapping[str, np.ndarray]  # lower-case ngspice vector name -> complex array


@dataclass(frozen=True, slots=True)
class SimResult:
    runs: tuple[RunResult, ...]
    operating_point: Mapping[str, float] = field(default_factory=dict)  # node voltages, lower-case names
    log: str = ""  # ngspice's own output, for messages
    deck_path: str | None = None  # where the deck was kept, if it was
    # the aid that made the operating point converge, if one was needed: one of the job's op_aids (or
    # netloop.sim.DEFAULT_OP_AIDS) as spelled there, or "ngspice: <method>" when ngspice's own fallback
    # (gmin or source stepping, transient operating point) found it; None when plain Newton converged
    convergence_aid: str | None = None
    backend: str = ""
    # the value as loaded (before the job's alters) of each parameter the job altered, by Alter.ref
    parameters: Mapping[str, float] = field(default_factory=dict)
    # False when the job ran on a circuit already loaded (a later round of one measurement, or a job whose
    # SimJob.changes ngspice made in place); True when ngspice read the netlist (and its model files) for it
    loaded: bool = True
    # seconds ngspice itself worked on the job: inside its circuit and command calls (shared library), or the whole
    # ngspice -b process (batch mode), summed over the processes that shared the job (netloop.sim.SplitRunsSimulator); with
    # one process, what a caller waited beyond this is netloop's own (processes, decks, data)
    ngspice_seconds: float = 0.0

    @property
    def warnings(self) -> tuple[str, ...]:
        """What ngspice ignored and went on without (unrecognized model parameters), from its log."""
        from netloop.sim.diagnostics import model_warnings  # noqa: PLC0415 - records stay import-light

        return model_warnings(self.log)

    def run(self, name: str) -> RunResult:
        for r in self.runs:
            if r.name == name:
                return r
        raise KeyError(name)


@runtime_checkable
class Simulator(Protocol):
    """Anything that runs a SimJob: the shared-library worker, batch mode, or the fake one in tests."""

    def run(self, job: SimJob) -> SimResult: ...

    def operating_point(self, netlist: str) -> Mapping[str, float]: ...
