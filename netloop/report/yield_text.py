"""The terminal summary of a statistical run: verdict first, the yields and the sentences they support, the spread of
the margins, the worst samples with their seeds, the samples a target needs, the caution."""

from __future__ import annotations

import math
from collections.abc import Sequence

from netloop.jobs.statistics import (
    EVERY,
    FIGURES,
    STABLE,
    STATISTICAL_CAUTION,
    SampleOutcome,
    SampleRun,
    Spread,
    Yield,
    YieldStatistics,
)
from netloop.report.notation import NONE, db, deg, eng

__all__ = [
    "METHOD",
    "figure_text",
    "needed_line",
    "percent",
    "rerun_command",
    "share",
    "spread_rows",
    "supports",
    "table",
    "verdict_line",
    "where",
    "worst_rows",
    "yield_rows",
    "yield_summary",
]

METHOD = "Clopper-Pearson (1934)"


def percent(fraction: float | None, way: str = "round") -> str:
    """A fraction as a percentage to 0.1 %: ``way`` "down" for a lower bound and "up" for an upper bound, so that the
    text never claims more than the bound ("99.006 %" is "99.0 %" as a lower bound); an estimate or a lower bound reads
    "100 %" only for 100 % itself, and "0 %" only for 0."""
    if fraction is None:
        return NONE
    tenths = fraction * 1000.0
    tenths = {"down": math.floor(tenths + 1e-9), "up": math.ceil(tenths - 1e-9)}.get(way, round(tenths))
    if tenths >= 1000 and fraction < 1.0 and way != "up":
        tenths = 999  # an estimate or a lower bound never reads "100 %" for less than all
    if tenths <= 0 and fraction > 0.0:
        tenths = 1 if way != "down" else 0
    text = f"{tenths / 10:.1f}"
    return f"{text.removesuffix('.0') if tenths in (0, 1000) else text} %"


def share(fraction: float) -> str:
    """A fraction someone named (a target, a confidence) as they would write it: "99 %", "99.9 %", "95 %"."""
    return f"{fraction * 100:.6g} %"


def _count(n: int, one: str, many: str) -> str:
    return f"no {one}" if n == 0 else f"{n} {one if n == 1 else many}"


def supports(y: Yield) -> str:
    """The sentence the data supports: "with 300 samples and no failure, yield >= 99.0 % at 95 % confidence"."""
    what = [_count(y.failed, "failure", "failures")]
    if y.no_verdict:
        what.append(f"{y.no_verdict} without a verdict (counted as failing)")
    joined = " and ".join(what) if len(what) == 1 else f"{what[0]}, {what[1]}"
    return f"with {y.samples} samples and {joined}, yield >= {percent(y.lower, 'down')} at {share(y.confidence)} confidence"


def where(y: Yield | Spread, nodes: int) -> str:
    """The corner (and break node, when the plan has several) a yield or spread is about; "every corner" for the dies."""
    corner = y.corner or "every corner"
    if nodes < 2:
        return corner
    return f"{corner} at {y.at}" if y.at else f"{corner} and node"


def figure_text(key: str, value: float | None) -> str:
    """A figure as the tables print it."""
    unit = FIGURES[key][1]
    if unit == "deg":
        return deg(value)
    if unit == "dB":
        return db(value)
    return eng(value, unit)


def table(head: Sequence[str], rows: Sequence[Sequence[str]], right: frozenset[int] = frozenset()) -> str:
    """Plain columns separated by two spaces, a rule under the head; columns in ``right`` aligned right."""
    widths = [max(len(str(x)) for x in col) for col in zip(head, *rows)]

    def line(row: Sequence[str]) -> str:
        return "  ".join(str(x).rjust(w) if i in right else str(x).ljust(w) for i, (x, w) in enumerate(zip(row, widths))).rstrip()

    return "\n".join([line(head), "  ".join("-" * w for w in widths), *(line(r) for r in rows)])


def verdict_line(stats: YieldStatistics) -> str:
    """The first line: the verdict and why, in the words of the yield."""
    v, y, c = stats.verdict, stats.deciding, share(stats.confidence)
    total = f"{y.samples} {'dies' if y.corner == '' and len(stats.corners) * len(stats.nodes) > 1 else 'samples'}"
    if stats.target is not None:
        target = share(stats.target)
        if v == "pass":
            return f"PASS  yield >= {percent(y.lower, 'down')} at {c} confidence, target {target}: {supports(y)}"
        if v == "fail":
            return (f"FAIL  yield below the target {target} at {c} confidence: at most {percent(y.upper, 'up')} "
                    f"({total}, {_count(y.failed, 'failure', 'failures')})")
        return (f"INCONCLUSIVE  the target {target} is neither shown nor ruled out at {c} confidence: yield between "
                f"{percent(y.lower, 'down')} and {percent(y.upper, 'up')} ({total}, {_count(y.failed, 'failure', 'failures')}, "
                f"{y.no_verdict} without a verdict); more samples decide it (below)")
    advice = "; name a yield target (--target, or target in [samples]) to decide on the yield"
    if v == "pass":
        return f"PASS  every sample passed: {supports(y)}{advice}"
    if v == "fail":
        bad = sum(1 for s in stats.samples if s.verdict in ("fail", "error"))
        return f"FAIL  {bad} of {len(stats.samples)} samples failed or were not measured: {supports(y)}{advice} instead of on every sample"
    unsure = sum(1 for s in stats.samples if s.verdict == "inconclusive")
    return (f"INCONCLUSIVE  {unsure} of {len(stats.samples)} samples have no verdict (a self-check failed; below): {supports(y)}{advice}")


def rerun_command(run: SampleRun, sample: SampleOutcome) -> str:
    """The command that measures one sample again, alone, with the same T bit for bit."""
    return f"netloop yield {run.plan.plan.path} --sample '{sample.name}'"


def yield_rows(stats: YieldStatistics) -> list[list[str]]:
    """The yield table's rows: each requirement (then stable, every requirement) at each corner and node, then every die."""
    rows = []
    nodes = len(stats.nodes)
    for req in (*stats.requirements, STABLE, EVERY):
        for y in stats.yields_of(req):
            rows.append([req, where(y, nodes), str(y.samples), str(y.passed), str(y.failed), str(y.no_verdict), percent(y.estimate),
                         f"{percent(y.interval[0], 'down')} to {percent(y.interval[1], 'up')}", f">= {percent(y.lower, 'down')}"])
    return rows


def spread_rows(stats: YieldStatistics) -> list[list[str]]:
    """The spread table's rows: each figure at each corner and node (then every corner)."""
    rows = []
    for s in stats.spreads:
        left = []
        if s.infinite:
            left.append(f"{s.infinite} infinite")
        if s.missing:
            left.append(f"{s.missing} none" + (" (no phase crossover)" if s.figure == "gm" else " (no crossover)"))
        if s.without_verdict:
            left.append(f"{s.without_verdict} without a verdict")
        rows.append([FIGURES[s.figure][0], where(s, len(stats.nodes)), str(s.count), figure_text(s.figure, s.mean), figure_text(s.figure, s.std),
                     figure_text(s.figure, s.min), figure_text(s.figure, s.max), ", ".join(left) or "-"])
    return rows


def worst_rows(stats: YieldStatistics) -> list[list[str]]:
    """The worst samples' rows: name, [break node], seed, the four figures, verdict, why."""
    return [[s.name, *([s.at] if len(stats.nodes) > 1 else []), str(s.seed), *(figure_text(k, s.figures.get(k)) for k in FIGURES),
             s.verdict, s.why or "-"] for s in stats.worst]


def needed_line(stats: YieldStatistics) -> str:
    """How many samples show the target, with no failure and at the failure rate seen; "" without a target."""
    n = stats.needed
    if n is None:
        return ""
    goal = f"samples to show yield >= {share(n.target)} at {share(n.confidence)} confidence ({METHOD}): {n.with_no_failure} with no failure"
    if n.rate_seen == 0:
        return goal
    if n.at_rate_seen is None:
        return f"{goal}; at the failure rate seen so far ({percent(n.rate_seen)}) no number of samples shows it"
    return f"{goal}; about {n.at_rate_seen} at the failure rate seen so far ({percent(n.rate_seen)})"


def _samples_text(count: int, corners: int, nodes: int) -> str:
    each = [f"{corners} corners"] * (corners > 1) + [f"{nodes} break nodes"] * (nodes > 1)
    return f"{count} at each of {' x '.join(each)}" if each else str(count)


def yield_summary(run: SampleRun) -> str:
    """The whole summary, as `netloop yield` prints it."""
    stats = run.statistics
    splan = run.plan
    last = splan.first_seed + splan.count - 1
    corners = len(stats.corners)
    lines = [
        verdict_line(stats),
        f"{'plan':<26}{splan.plan.path}",
        f"{'samples':<26}{_samples_text(splan.count, corners, len(stats.nodes))}, seeds {splan.first_seed} to {last}"
        + ("; a seed draws the same mismatch at every corner (one die)" if corners > 1 else ""),
        f"{'results':<26}{run.run.results_path} ({run.run.ran} run now" + (f", {run.run.skipped} found done" if run.run.skipped else "") + ")",
        "",
        f"yield ({METHOD} bounds at {share(stats.confidence)} confidence; a sample without a verdict counts as failing)",
        table(["requirement", "corner", "samples", "pass", "fail", "no verdict", "yield", "interval", "lower bound"], yield_rows(stats),
              right=frozenset({2, 3, 4, 5, 6})),
    ]
    lines.append(f"the data supports: {supports(stats.deciding)} ({EVERY}, {where(stats.deciding, len(stats.nodes))})")
    lines += ["", "spread over the samples with a verdict",
              table(["figure", "corner", "n", "mean", "std", "min", "max", "left out"], spread_rows(stats), right=frozenset({2, 3, 4, 5, 6}))]
    head = ["sample", *(["at"] if len(stats.nodes) > 1 else []), "seed", *(FIGURES[k][0] for k in FIGURES), "verdict", "why"]
    lines += ["", "worst samples (no verdict and failures first, then the lowest phase margin)", table(head, worst_rows(stats)),
              f"rerun one alone, bit for bit: {rerun_command(run, stats.worst[0]) if stats.worst else 'netloop yield PLAN --sample NAME'}"]
    needed = needed_line(stats)
    if needed:
        lines += ["", needed]
    lines += ["", f"caution: {STATISTICAL_CAUTION}"]
    return "\n".join(lines)
