"""report stage: text, JSON, CSV, JUnit XML, plots and HTML from measured loops (formatting only, no computing).

notation      engineering notation, degrees and decibels as printed
document      the JSON document of a loop (schema "netloop.loop/1") and of several loops
text          the terminal summary of one loop, verdict first
samples       the sampled return ratio as CSV
corner_records  corner records (one JSON line each): verdicts, worst-first order, table, counts, CSV, JUnit, run document
corners       CornerOutcome (LoopResult-based), turned into corner records: table worst first, CSV, JUnit XML, JSON
phrases       the wording of the figures, shared by text and HTML
files         writing files: OSError -> OutputError
figure        matplotlib plumbing: lazy import, no pyplot, format by file extension
labels        non-overlapping margin labels
bode_plot     Bode plot with every margin drawn
nyquist_plot  Nyquist plot with a compressed radius
html          the self-contained HTML report (templates/report.html.j2)
boundaries    requirement boundaries along numeric plan axes, in words, with the interpolation method
maps          margins against one numeric axis, a figure over two with the requirement's boundary (PNG, SVG)
baseline      a corner run against its baseline: summary, table of changes, regressions, JSON, JUnit suite
trend         the worst phase margin of each corner over several runs: table, chart, JSON
corner_page   the HTML page of a corner run (templates/corners_section.html.j2 within the report page)
yield_text, yield_document, yield_plot, yield_html   a statistical run: summary, JSON and CSV, histograms and scatter, page

matplotlib and jinja2 are imported only when a plot or a page is made.
"""

from netloop.report.bode_plot import bode_figure, plot_bode
from netloop.report.corners import (
    CORNER_COLUMNS,
    CornerOutcome,
    corner_document,
    corner_summary,
    corner_table,
    junit_xml,
    sort_worst_first,
    write_corner_csv,
)
from netloop.jobs.document import SCHEMA, groups_document, multi_document, to_document
from netloop.report.html import render_html, write_html
from netloop.report.nyquist_plot import compress_radius, nyquist_figure, plot_nyquist
from netloop.report.samples import SAMPLE_COLUMNS, sample_table, write_csv
from netloop.report.text import format_text, requirement_text, verdict_line

__all__ = [
    "CORNER_COLUMNS",
    "SAMPLE_COLUMNS",
    "SCHEMA",
    "CornerOutcome",
    "bode_figure",
    "compress_radius",
    "corner_document",
    "corner_summary",
    "corner_table",
    "format_text",
    "junit_xml",
    "groups_document",
    "multi_document",
    "nyquist_figure",
    "plot_bode",
    "plot_nyquist",
    "render_html",
    "requirement_text",
    "sample_table",
    "sort_worst_first",
    "to_document",
    "verdict_line",
    "write_corner_csv",
    "write_csv",
    "write_html",
]
