"""runs job: what the results files of corner runs say, beyond one table: maps over numeric plan axes, where a
requirement stops holding, a run against an earlier one (a baseline), and the worst phase margin over several runs.

results    read a results file (PLAN.results.jsonl): its corner records, the last of each corner and break node
figures    a figure of a record (pm, gm, fc, peak and the other requirement metrics), from its loop document
axes       the numeric axes of a run's settings (load current, ESR, temperature, supply, any parameter) and the
           lines along one of them (corners equal in every other setting)
boundary   where a requirement stops holding along a line, interpolated between the corners that bracket it
limits     how much worse than the baseline a figure may get (plan [regression] table, --limit)
baseline   one run against an earlier results file, corner by corner and loop by loop: changes, regressions,
           new and vanished corners
trend      the worst phase margin of each corner over several results files
"""

from netloop.jobs.runs.axes import Line, NumericAxis, lines_along, numeric_axes
from netloop.jobs.runs.baseline import BaselineComparison, Change, Regression, compare_runs
from netloop.jobs.runs.boundary import INTERPOLATION, Boundary, Crossing, boundaries
from netloop.jobs.runs.figures import FIGURES, MAP_FIGURES, figure_value
from netloop.jobs.runs.limits import Limit, parse_limit, parse_limits
from netloop.jobs.runs.results import ResultsFile, read_results
from netloop.jobs.runs.trend import Trend, TrendRow, trend_of

__all__ = [
    "FIGURES",
    "INTERPOLATION",
    "MAP_FIGURES",
    "BaselineComparison",
    "Boundary",
    "Change",
    "Crossing",
    "Limit",
    "Line",
    "NumericAxis",
    "Regression",
    "ResultsFile",
    "Trend",
    "TrendRow",
    "boundaries",
    "compare_runs",
    "figure_value",
    "lines_along",
    "numeric_axes",
    "parse_limit",
    "parse_limits",
    "read_results",
    "trend_of",
]
