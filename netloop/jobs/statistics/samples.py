"""The samples of a statistical plan: each corner of the plan once per seed, as corner tasks with a seed setting.

A sample is a corner whose netlist starts with ``.option seed=N`` (netloop.jobs.corners.apply.seed_line):
ngspice draws every ``agauss``/``gauss`` value of the circuit (a process's mismatch models) when it reads
the circuit, from that seed, so each sample needs a load of its own and gives the same draws, and the
same T bit for bit, whenever it runs. Sample i carries seed first_seed + i - 1 at every corner: the same
die at each corner. Samples of one seed that differ only in temperature, supplies or .param values share
that load (the corners' share_loads), ngspice changing those values in place.
"""

from __future__ import annotations

from dataclasses import replace

from netloop.jobs.corners.apply import apply_settings
from netloop.jobs.corners.expand import Corner, Task, tasks_of
from netloop.jobs.corners.plan import Setting
from netloop.jobs.corners.runner import checked_plan
from netloop.jobs.statistics.plan import SamplePlan
from netloop.netlist import Netlist

__all__ = ["SEPARATOR", "sample_name", "sample_of", "sample_tasks", "seeded_netlist"]

SEPARATOR = "#"  # a sample's name: its corner's, then "#" and its number ("27C#17", "nominal#3")


def sample_name(corner: str, index: int) -> str:
    """The name of sample ``index`` (1-based) of a corner."""
    return f"{corner}{SEPARATOR}{index}"


def sample_of(record: dict) -> tuple[str, int | None]:
    """(corner name, seed) of a results-file record: the corner's name without the sample number, and the seed its
    settings hold (None for a record of no sample)."""
    corner, sep, _ = str(record.get("corner", "")).rpartition(SEPARATOR)
    seed = (record.get("settings") or {}).get("seed")
    try:
        return (corner if sep else str(record.get("corner", ""))), (int(seed) if seed is not None else None)
    except (TypeError, ValueError):
        return corner, None


def seeded_netlist(path: str, seed: int) -> Netlist:
    """The netlist file at ``path`` with ngspice's seed set, exactly as the sample with that seed reads it at a corner
    without settings (``netloop check --seed``)."""
    return apply_settings(path, (Setting("seed", "", str(seed)),))


def sample_tasks(splan: SamplePlan) -> tuple[Task, ...]:
    """Every sample at every corner and break node, corner by corner in plan order, samples in seed order; each
    corner is applied once and every break node looked up first (netloop.jobs.corners.check_plan), so a plan the
    netlist cannot take stops here with the plan's file:line."""
    return checked_samples(splan)[0]


def checked_samples(splan: SamplePlan) -> tuple[tuple[Task, ...], dict[tuple, tuple]]:
    """sample_tasks' tasks, and the netlists the plan's check read for them (netloop.jobs.corners.checked_plan), which
    the workers take instead of reading them again."""
    plan = splan.plan
    checked, netlists = checked_plan(plan)  # a plan's settings cannot set the seed (netloop.jobs.corners.plan.KINDS)
    samples, inputs = [], {}
    for t in checked:
        if t.corner.name in inputs:
            continue  # the same corner at another break node: tasks_of pairs each sample with every node
        inputs[t.corner.name] = t.inputs
        for index, seed in enumerate(splan.seeds, start=1):
            settings = (*t.corner.settings, Setting("seed", "", str(seed)))
            samples.append(Corner(sample_name(t.corner.name, index), t.corner.netlist, settings, t.corner.line))
    # a name ends in "#" and digits, so its corner is the part before the last "#" (unique whatever the corners' names)
    return tuple(replace(t, inputs=inputs[t.corner.name.rpartition(SEPARATOR)[0]]) for t in tasks_of(plan, tuple(samples))), netlists
