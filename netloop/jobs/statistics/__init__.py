"""statistics job: the yield of a loop's margins over a process's statistical models (Monte Carlo), built on corner plans.

plan      read a statistical plan: a corner plan with a [samples] table (count, first seed, target, confidence)
samples   each corner once per seed: corner tasks whose netlist starts with ``.option seed=N``
run       run the samples on Dask as corner tasks (journalled, resumable); rerun one sample alone
summary   yields per requirement with Clopper-Pearson bounds, spreads, worst samples, samples needed
bounds    the Clopper-Pearson (1934) bounds and the samples a yield target needs
"""

from netloop.jobs.statistics.bounds import (
    interval,
    lower_bound,
    samples_needed,
    upper_bound,
)
from netloop.jobs.statistics.plan import (
    SamplePlan,
    load_sample_plan,
    parse_fraction,
    parse_sample_plan,
)
from netloop.jobs.statistics.run import SampleRun, rerun_sample, run_samples
from netloop.jobs.statistics.samples import (
    sample_name,
    sample_of,
    sample_tasks,
    seeded_netlist,
)
from netloop.jobs.statistics.summary import (
    EVERY,
    FIGURES,
    STABLE,
    STATISTICAL_CAUTION,
    Needed,
    SampleOutcome,
    Spread,
    Yield,
    YieldStatistics,
    statistics_part,
    summarise,
)

__all__ = [
    "EVERY",
    "FIGURES",
    "STABLE",
    "STATISTICAL_CAUTION",
    "Needed",
    "SampleOutcome",
    "SamplePlan",
    "SampleRun",
    "Spread",
    "Yield",
    "YieldStatistics",
    "interval",
    "load_sample_plan",
    "lower_bound",
    "parse_fraction",
    "parse_sample_plan",
    "rerun_sample",
    "run_samples",
    "sample_name",
    "sample_of",
    "sample_tasks",
    "samples_needed",
    "seeded_netlist",
    "statistics_part",
    "summarise",
    "upper_bound",
]
