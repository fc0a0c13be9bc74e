"""The HTML report of a statistical run: one self-contained page with the verdict, the yields and the sentences they
support, the histograms and the scatter, the spread of the margins, the worst samples with their seeds, the caution."""

from __future__ import annotations

from pathlib import Path

from netloop.jobs.statistics import STATISTICAL_CAUTION, SampleRun
from netloop.report.files import output_file
from netloop.report.html import page_template, png_uri
from netloop.report.yield_plot import histogram_figure, scatter_figure
from netloop.report.yield_text import (
    METHOD,
    needed_line,
    rerun_command,
    share,
    spread_rows,
    supports,
    verdict_line,
    worst_rows,
    yield_rows,
)

__all__ = ["render_yield_html", "write_yield_html"]

TEMPLATE = "yield_section.html.j2"
_CLASS = {"pass": "pass", "fail": "fail", "inconclusive": "inconclusive"}


def _cells(rows: list[list[str]], text_columns: int) -> list[list[dict]]:
    return [[{"text": x, "cls": "" if i < text_columns else "num"} for i, x in enumerate(row)] for row in rows]


def render_yield_html(run: SampleRun) -> str:
    """The whole page (UTF-8 text, plots embedded as PNG)."""
    stats, splan = run.statistics, run.plan
    worst = worst_rows(stats)
    context = {
        "verdict": verdict_line(stats),
        "verdict_class": _CLASS[stats.verdict],
        "facts": [
            {"label": "plan", "value": splan.plan.path},
            {"label": "netlist", "value": splan.plan.netlist},
            {"label": "break node(s)", "value": ", ".join(stats.nodes)},
            {"label": "corners", "value": ", ".join(stats.corners)},
            {"label": "samples", "value": f"{splan.count} at each corner, seeds {splan.first_seed} to {splan.first_seed + splan.count - 1}"
                                          + ("; a seed draws the same mismatch at every corner" if len(stats.corners) > 1 else "")},
            {"label": "requirements", "value": ", ".join(stats.requirements) or "none (stability only)"},
            {"label": "target", "value": f"yield >= {share(stats.target)} at {share(stats.confidence)} confidence" if stats.target else "none named"},
            {"label": "results file", "value": run.run.results_path},
        ],
        "method": (f"{METHOD} bounds at {share(stats.confidence)} confidence: the interval is two-sided, the lower bound one-sided. "
                   "A sample without a verdict (a self-check failed, or it could not be measured) counts as failing in the yield, "
                   "the interval and the lower bound, and as passing in the upper bound. A lower bound at "
                   f"{share(stats.confidence)} confidence means: were the yield below it, as few failures as these would be seen in "
                   f"fewer than {share(1.0 - stats.confidence)} of runs like this one. It holds under the statistical models the "
                   "netlist reads, at the corners of the plan."),
        "yield_head": ["requirement", "corner", "samples", "pass", "fail", "no verdict", "yield", "interval", "lower bound"],
        "yield_rows": _cells(yield_rows(stats), 2),
        "supports": supports(stats.deciding),
        "needed": needed_line(stats),
        "histograms": png_uri(histogram_figure(run)),
        "scatter": png_uri(scatter_figure(run)),
        "spread_head": ["figure", "corner", "n", "mean", "std", "min", "max", "left out"],
        "spread_rows": [[*c[:-1], {**c[-1], "cls": ""}] for c in _cells(spread_rows(stats), 2)],
        "rerun": rerun_command(run, stats.worst[0]) if stats.worst else "netloop yield PLAN --sample NAME",
        "worst_head": ["sample", *(["at"] if len(stats.nodes) > 1 else []), "seed", "phase margin", "gain margin", "crossover",
                       "peaking", "verdict", "why"],
        "worst_rows": [[*c[:-2], {**c[-2], "cls": {"pass": "ok", "fail": "bad"}.get(c[-2]["text"], "warn")}, {**c[-1], "cls": ""}]
                       for c in _cells(worst, 2 + (len(stats.nodes) > 1))],
    }
    section = page_template(TEMPLATE).render(**context)
    from markupsafe import Markup

    return page_template("report.html.j2").render(
        title=f"netloop yield: {Path(splan.plan.path).name}",
        subtitle=f"{splan.count} samples of {Path(splan.plan.netlist).name}" + (f" at each of {len(stats.corners)} corners "
                                                                               f"({len(stats.samples)} measurements)" if len(stats.corners) > 1 else ""),
        sections=[Markup(section)], overview=None, loops=[], caution=STATISTICAL_CAUTION)


def write_yield_html(run: SampleRun, path: str | Path) -> Path:
    """Write render_yield_html(run) to ``path``; returns the path (OutputError when it cannot)."""
    page = render_yield_html(run)
    with output_file(path, "HTML report") as out:
        out.write_text(page, encoding="utf-8")
    return out
