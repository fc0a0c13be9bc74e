"""corners job: run a corner plan (TOML) as a regression on Dask, composing measure() once per corner.

plan       read and check the plan file: netlist, break nodes, axes, explicit corners, requirements
expand     the corners of a plan (product of the axes, then the explicit list) and the tasks to run
apply      a corner's netlist: .lib section, .temp, .param values, supply DC, on a copy
worker     what a Dask worker runs: one corner, with the worker's own ngspice
journal    the results file, one JSON line per corner, written as each finishes; --resume reads it
runner     the Dask client (local cluster or a scheduler's address), submission and collection
progress   the plain progress bar on stderr
"""

from netloop.jobs.corners.apply import CornerApplyError, apply_settings
from netloop.jobs.corners.expand import Corner, Task, expand, tasks_of
from netloop.jobs.corners.journal import SCHEMA, default_results_path, read_records
from netloop.jobs.corners.plan import Axis, CornerSpec, Plan, Setting, load_plan, parse_plan
from netloop.jobs.corners.runner import CornerRun, check_plan, dask_client, run_plan
from netloop.jobs.corners.worker import TaskOptions, run_task

__all__ = [
    "SCHEMA",
    "Axis",
    "Corner",
    "CornerApplyError",
    "CornerRun",
    "CornerSpec",
    "Plan",
    "Setting",
    "Task",
    "TaskOptions",
    "apply_settings",
    "check_plan",
    "dask_client",
    "default_results_path",
    "expand",
    "load_plan",
    "parse_plan",
    "read_records",
    "run_plan",
    "run_task",
    "tasks_of",
]
