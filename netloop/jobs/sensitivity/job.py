"""sensitivities(): measure one loop, find how each knob moves its margins, and solve for the values that meet a requirement."""

from __future__ import annotations

import contextlib
import logging
import math
import time
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from os import PathLike

from netloop.analysis import parse_requirements
from netloop.analysis.local import windows_of
from netloop.analysis.requirements import Requirement
from netloop.errors import NetloopError
from netloop.jobs.loop_result import LoopResult
from netloop.jobs.measure import (
    CLEARS_STATUS,
    Sweep,
    load_netlist,
    measure,
    probe_job,
    simulator_processes,
)
from netloop.jobs.sensitivity.edit import changed_netlist
from netloop.jobs.sensitivity.knobs import Knob, find_knobs, select_knobs
from netloop.jobs.sensitivity.records import Sensitivity, SensitivityRun, WhatIf
from netloop.jobs.sensitivity.remeasure import Copies, Remeasure
from netloop.jobs.sensitivity.slopes import slopes_of
from netloop.jobs.sensitivity.spread import SPREAD_MIN_SECONDS, spread_slopes
from netloop.jobs.sensitivity.whatif import figure_of, solve_knob
from netloop.netlist import Netlist
from netloop.probe import split_loop
from netloop.sim import SimJob, SimResult, Simulator
from netloop.sim.background import StartingSimulator

__all__ = ["DEFAULT_SPAN", "DEFAULT_STEP", "rank", "sensitivities"]

DEFAULT_STEP = 0.01
"""h: each knob is simulated at x e^(+-h) and x e^(+-2h), i.e. about +-1 % and +-2 %."""
DEFAULT_SPAN = (0.1, 10.0)
"""The factors a what-if searches by default: a plausible range for one value, everything else held."""

_log = logging.getLogger("netloop")


class _Remembering:
    """A simulator that passes every job on and remembers them: the measured loop's job names the circuit that stays loaded."""

    def __init__(self, inner: Simulator):
        self.inner = inner
        self.jobs: list[SimJob] = []

    def run(self, job: SimJob) -> SimResult:
        self.jobs.append(job)
        return self.inner.run(job)

    def operating_point(self, netlist: str):
        return self.inner.operating_point(netlist)

    def abort(self) -> None:
        abort = getattr(self.inner, "abort", None)
        if abort is not None:
            abort()

    @property
    def backend(self) -> str:
        return getattr(self.inner, "backend", type(self.inner).__name__)

    @property
    def simulators(self) -> tuple:
        return tuple(getattr(self.inner, "simulators", ()))


@dataclass(frozen=True, slots=True)
class _Loop:
    """The loop as the caller asked for it measured: netlist, break and measure()'s options."""

    netlist: Netlist
    at: str
    driver: str | None
    method: str
    sweep: Sweep
    open_loop_rhp_poles: int | None
    timeout_s: float

    def measure(self, netlist: Netlist, simulator: Simulator, requirements: tuple[Requirement, ...], label: str = "") -> LoopResult:
        return measure(netlist, self.at, driver=self.driver, method=self.method, sweep=self.sweep, open_loop_rhp_poles=self.open_loop_rhp_poles,
                       requirements=requirements, simulator=simulator, label=label, timeout_s=self.timeout_s)


def rank(sensitivities: Iterable[Sensitivity], figure: str) -> tuple[Sensitivity, ...]:
    """Largest |slope| of ``figure`` first; knobs without that slope last, in their order; ties by name (any hash seed)."""
    items = list(sensitivities)
    with_slope = [s for s in items if s.slope(figure).per_decade is not None]
    without = [s for s in items if s.slope(figure).per_decade is None]
    with_slope.sort(key=lambda s: (-abs(s.slope(figure).per_decade), s.knob.name))
    return (*with_slope, *without)


def _own(simulator: Simulator | None, keep_decks):
    if simulator is not None:
        return contextlib.nullcontext(simulator)
    return StartingSimulator(keep_dir=str(keep_decks) if keep_decks else None)


def sensitivities(
    netlist: Netlist | str | PathLike[str],
    at: str,
    *,
    driver: str | None = None,
    method: str = "tian",
    sweep: Sweep = Sweep(),
    open_loop_rhp_poles: int | None = None,
    requirements: Iterable[str | Requirement] = (),
    knobs: Sequence[str] = (),
    solve: Sequence[str] = (),
    top: int = 3,
    step: float = DEFAULT_STEP,
    span: tuple[float, float] = DEFAULT_SPAN,
    rank_by: str | None = None,
    simulator: Simulator | None = None,
    keep_decks: str | PathLike[str] | None = None,
    timeout_s: float = 600.0,
    processes: int | None = None,
    workers: int | None = None,
) -> SensitivityRun:
    """Break the loop at ``at``, measure it, then rank every knob by how much it moves the margins.

    ``knobs``: the knob names to try (``cc``, ``m6:w``, ``xa1.m3:l``; all of them by default, see
    find_knobs). ``requirements``: for each, the value of each knob in ``solve`` (by default the ``top``
    knobs ranked by that requirement's figure) that meets it with everything else held, searched
    between ``span`` factors, re-simulated afresh with the value written into the netlist.
    ``step`` is h, the change of ln x of the central differences (x e^+-h and x e^+-2h are simulated).
    ``workers``: Dask worker processes sharing the knobs (default: 1, or more when the knobs would take
    long on one; see netloop.jobs.sensitivity.spread). The other options are measure()'s.

    A measurement whose self-checks fail (verdict inconclusive) gives no sensitivity: ``withheld`` says why.
    """
    if not (0.0 < step <= 0.2):
        raise NetloopError(f"the step must lie in (0, 0.2] (a change of ln x), got {step!r}")
    if not (0.0 < span[0] < 1.0 < span[1]) or not all(math.isfinite(v) for v in span):
        raise NetloopError(f"the range of a what-if must be LOW,HIGH factors with 0 < LOW < 1 < HIGH, got {span[0]:g},{span[1]:g}")
    if top < 1:
        raise NetloopError(f"top must be 1 or more, got {top}")
    reqs = parse_requirements(requirements)
    started = time.perf_counter()
    with _own(simulator, keep_decks) as sim:
        parsed = load_netlist(netlist)
        every = find_knobs(parsed)
        chosen = select_knobs(every, knobs) if knobs else every
        to_solve = select_knobs(every, solve) if solve else ()
        if simulator is None:
            sim.use_processes(simulator_processes(processes, parsed, runs=2))
        remembering = _Remembering(sim)
        loop = _Loop(parsed, at, driver, method, sweep, open_loop_rhp_poles, timeout_s)
        nominal = loop.measure(parsed, remembering, reqs)
        figure = rank_by or (figure_of(reqs[0]) if reqs else "pm")
        if nominal.verdict == "inconclusive":
            why = "; ".join(c.detail for c in nominal.failed_checks)
            return SensitivityRun(nominal, at, step, figure, (), (), f"the measurement's self-checks failed ({why}): "
                                  "a slope of a figure that cannot be trusted means nothing", 0, 0, time.perf_counter() - started)
        remeasure = _remeasure(loop, nominal, remembering.jobs)
        _log.info("changing %d value(s) by +-%g %% and +-%g %%", len(chosen), 100 * math.expm1(step), 100 * math.expm1(2 * step))
        found, used = _slopes(remeasure, sim, chosen, step, workers)
        ranked = rank(found, figure)
        what_ifs = tuple(
            _what_if(remeasure, sim, loop, nominal, req, s, span)
            for req in reqs
            for s in _targets(ranked, to_solve, figure_of(req), top)
        )
        _log.info("sensitivities done", extra=CLEARS_STATUS)
    return SensitivityRun(nominal, at, step, figure, ranked, what_ifs, None, len(remeasure.windows), used, time.perf_counter() - started)


def _remeasure(loop: _Loop, nominal: LoopResult, jobs: list[SimJob]) -> Remeasure:
    """The Remeasure of the measured loop: its own probe job (whose circuit is still loaded) and windows around its features."""
    probed = split_loop(loop.netlist, loop.at, driver=loop.driver)[0]
    # its last job exciting this split's series source (the netlist may hold another split's probe too: netloop.probe.chain)
    job = next((j for j in reversed(jobs) if j.circuit_id and set(probed.vectors.save) <= set(j.save) and j.runs
                and j.runs[0].ac.get(probed.series_source)), None)
    if job is None:
        job = probe_job(probed, (), timeout_s=loop.timeout_s)
    analysis = nominal.analysis
    return Remeasure(job, probed.vectors, loop.method, loop.sweep, loop.open_loop_rhp_poles, windows_of(analysis),
                     analysis.nyquist.stable, analysis.floor_db, Copies(loop.netlist, loop.at, loop.driver, loop.timeout_s))


def _slopes(remeasure: Remeasure, sim: Simulator, knobs: tuple[Knob, ...], step: float, workers: int | None) -> tuple[tuple[Sensitivity, ...], int]:
    """Every knob's slopes here, or spread over Dask workers when asked or when one process would take long.

    The knobs ngspice changes in place go first, on the measured loop's loaded circuit; those that need
    an edited copy read again (Knob.reload) go last, so the loaded circuit is left once. The time of the
    first knob of each kind judges the rest."""
    if not knobs:
        return (), 1
    ordered = (*(k for k in knobs if k.in_place), *(k for k in knobs if not k.in_place))
    if workers is None or workers > 1:
        head: list[Sensitivity] = []
        estimate = 0.0
        for group in ([k for k in ordered if k.in_place], [k for k in ordered if not k.in_place]):
            if group:
                first = time.perf_counter()
                head.extend(slopes_of(remeasure, sim, group[:1], step))
                estimate += (time.perf_counter() - first) * (len(group) - 1)
        done = {s.knob for s in head}
        rest = tuple(k for k in ordered if k not in done)
        if rest and (workers is not None or estimate > SPREAD_MIN_SECONDS):
            spread, used = spread_slopes(remeasure, rest, step, workers)
            found, count = (*head, *spread), used
        else:
            found, count = (*head, *slopes_of(remeasure, sim, rest, step)), 1
    else:
        found, count = slopes_of(remeasure, sim, ordered, step), 1
    by_knob = {s.knob: s for s in found}
    return tuple(by_knob[k] for k in knobs), count


def _targets(ranked: tuple[Sensitivity, ...], chosen: tuple[Knob, ...], figure: str, top: int) -> tuple[Sensitivity, ...]:
    """The knobs a what-if solves for: those chosen, else the ``top`` with the largest slope of ``figure``."""
    if chosen:
        by_knob = {s.knob: s for s in ranked}
        return tuple(by_knob[k] for k in chosen if k in by_knob)
    return tuple(s for s in rank(ranked, figure) if s.slope(figure).per_decade)[:top]


def _what_if(remeasure: Remeasure, sim: Simulator, loop: _Loop, nominal: LoopResult, requirement: Requirement,
             sensitivity: Sensitivity, span: tuple[float, float]) -> WhatIf:
    """Solve one knob for one requirement, then measure the loop afresh with the solved value written into the netlist."""
    knob, value = sensitivity.knob, sensitivity.value
    if value is None or sensitivity.problem:
        why = sensitivity.problem or "its value could not be read"
        return WhatIf(knob, requirement.text, value, None, None, span, False, True, (), None, None,
                      f"no what-if for {knob.name}: {why}")
    _log.info("solving %s for %s", knob.name, requirement.text)
    solution = solve_knob(remeasure, sim, knob, requirement, nominal.analysis, sensitivity.slope(figure_of(requirement)), span)
    if solution.factor is None:
        return WhatIf(knob, requirement.text, value, None, None, span, solution.met_at_value, solution.monotonic, solution.tried,
                      None, None, solution.reason)
    changed, card = changed_netlist(loop.netlist, knob, solution.factor, value)
    check = loop.measure(changed, sim, (requirement,), label=f"{knob.name} = {value * solution.factor:.6g}")
    return WhatIf(knob, requirement.text, value, value * solution.factor, solution.factor, span, solution.met_at_value,
                  solution.monotonic, solution.tried, check, card, "")
