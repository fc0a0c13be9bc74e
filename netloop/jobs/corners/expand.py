"""Expand a plan into its corners (the product of the axes, then the explicit list) and the tasks to run."""

from __future__ import annotations

import hashlib
import itertools
import json
from dataclasses import dataclass

from netloop.jobs.corners.plan import KINDS, Plan, Setting

__all__ = ["Corner", "Task", "expand", "tasks_of"]


@dataclass(frozen=True, slots=True)
class Corner:
    """One corner: a unique name, the netlist it starts from and the settings applied to it, in KINDS order."""

    name: str
    netlist: str  # absolute path
    settings: tuple[Setting, ...]
    line: int  # the plan line that produced it (the [[corner]] table, or the first axis)

    def describe(self) -> dict[str, str]:
        """The settings as a flat mapping for reports: {"lib": "ss", "temp": "125", "supply.vdd": "3.0", ...}."""
        return {f"{s.kind}.{s.target}" if s.target else s.kind: s.value for s in self.settings}


@dataclass(frozen=True, slots=True)
class Task:
    """One unit of work: a corner measured at one break node (or at every loop, for "auto")."""

    corner: Corner
    at: str
    key: str  # stable identity of everything that decides the result, for --resume
    inputs: tuple[str, ...] = ()  # every file the corner's netlist reads (netlist, includes, libraries), for --resume

    @property
    def title(self) -> str:
        return self.corner.name


def _ordered(settings: tuple[Setting, ...]) -> tuple[Setting, ...]:
    return tuple(sorted(settings, key=lambda s: KINDS.index(s.kind)))


def _name(settings: tuple[Setting, ...]) -> str:
    return "/".join(s.label for s in settings) or "nominal"


def expand(plan: Plan) -> tuple[Corner, ...]:
    """Every corner of the plan, product first (last axis varying fastest), then the [[corner]] list.

    A plan without axes and without [[corner]] tables has one corner, "nominal" (the netlist as written).
    """
    corners: list[Corner] = []
    if plan.axes:
        line = plan.axes[0].line
        pools = [[Setting(a.kind, a.target, v) for v in a.values] for a in plan.axes]
        for combo in itertools.product(*pools):
            given = _ordered(tuple(combo))
            settings = _with_process(plan, given, line)
            corners.append(Corner(_name(given), _netlist(plan, settings), settings, line))
    for spec in plan.corners:
        given = _ordered(spec.settings)
        settings = _with_process(plan, given, spec.line)
        corners.append(Corner(spec.name or _name(given), _netlist(plan, settings), settings, spec.line))
    if not plan.axes and not plan.corners:
        corners.append(Corner("nominal", plan.netlist, (), 1))
    seen: dict[str, Corner] = {}
    for c in corners:
        if c.name in seen:
            raise plan.error(f"two corners are named {c.name!r} (the other comes from line {seen[c.name].line}); give each [[corner]] its own name", line=c.line)
        seen[c.name] = c
    return tuple(corners)


def _with_process(plan: Plan, given: tuple[Setting, ...], line: int) -> tuple[Setting, ...]:
    """The corner's settings with its process corner's lib and include settings added (the process setting kept, for
    its name); a .lib line or include word set both by the process corner and by the corner itself is a PlanError."""
    chosen = next((s for s in given if s.kind == "process"), None)
    process = plan.process(chosen.value) if chosen is not None else None
    if process is None:
        return given
    own = {(s.kind, s.target.lower()): s for s in given}
    for s in process.settings:
        if (s.kind, s.target.lower()) in own:
            what = f"{s.kind}.{s.target}" if s.target else s.kind
            raise plan.error(f"{what} is set both by process corner {process.name!r} (line {process.line}) and by the corner itself; "
                             "set it in one place", line=line)
    return _ordered((*given, *process.settings))


def _netlist(plan: Plan, settings: tuple[Setting, ...]) -> str:
    return next((s.value for s in settings if s.kind == "netlist"), plan.netlist)


def tasks_of(plan: Plan, corners: tuple[Corner, ...]) -> tuple[Task, ...]:
    """One task per corner and break node, each with a key that changes when anything deciding its result changes."""
    common = {
        "method": plan.method,
        "driver": plan.driver,
        "requirements": [r.text for r in plan.requirements],
        "rhp": plan.open_loop_rhp_poles,
        "sweep": [plan.sweep.fmin_hz, plan.sweep.fmax_hz, plan.sweep.points_per_decade, plan.sweep.fmin_given, plan.sweep.fmax_given],
    }
    out = []
    for corner in corners:
        for at in plan.at:
            ident = {**common, "corner": corner.name, "netlist": corner.netlist, "at": at,
                     "settings": [[s.kind, s.target, s.value] for s in corner.settings]}
            digest = hashlib.sha256(json.dumps(ident, sort_keys=True).encode()).hexdigest()[:16]
            out.append(Task(corner, at, digest))
    return tuple(out)
