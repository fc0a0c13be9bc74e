"""The sensitivity run presented: the ranked table (long lists counted), the chart's colours and layout, the HTML section."""

from __future__ import annotations

from pathlib import Path

import pytest

from netloop.jobs.sensitivity import sensitivities
from netloop.report.sensitivity_html import sensitivity_section
from netloop.report.sensitivity_plot import HELPS, HURTS, SHOWN_BARS, sensitivity_figure
from netloop.report.sensitivity_text import SHOWN_ROWS, format_sensitivity_text

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def run():
    """Every knob of circuits/ref_buffer.cir (30), ranked by phase margin."""
    return sensitivities(ROOT / "circuits" / "ref_buffer.cir", "out")


@pytest.mark.ngspice
def test_long_table_is_counted(run):
    """The text shows the first rows of a long ranking and counts the rest, pointing at --json for all of them."""
    text = format_sensitivity_text(run)
    assert f"... and {len(run.sensitivities) - SHOWN_ROWS} more (every knob is in --json)" in text
    assert "deg/decade" in text and "Hz/decade" in text


@pytest.mark.ngspice
def test_chart_colours_say_help_or_hurt_and_everything_lies_inside(run):
    """Raising Cc raises the margin (its phase-margin bar is the 'helps' colour), raising CL lowers it; at most
    SHOWN_BARS rows; the title, legend and axis labels lie inside the figure (matplotlib's own renderer)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg  # noqa: PLC0415
    from matplotlib.colors import to_hex  # noqa: PLC0415

    fig = sensitivity_figure(run)
    pm_axes = fig.axes[0]
    bars = [p for p in pm_axes.patches]
    assert len(bars) == SHOWN_BARS
    names = [t.get_text().split()[0] for t in pm_axes.get_yticklabels()]
    colours = dict(zip(names, (to_hex(b.get_facecolor()) for b in bars), strict=True))
    assert colours["cc"] == HELPS and colours["cl"] == HURTS
    renderer = FigureCanvasAgg(fig).get_renderer()
    fig.draw(renderer)
    box = fig.bbox
    for artist in (*fig.legends, fig._suptitle, *(ax.xaxis.label for ax in fig.axes), *(ax.title for ax in fig.axes)):
        extent = artist.get_window_extent(renderer)
        assert box.x0 - 1 <= extent.x0 and extent.x1 <= box.x1 + 1 and box.y0 - 1 <= extent.y0 and extent.y1 <= box.y1 + 1, artist


@pytest.mark.ngspice
def test_html_section_lists_every_knob(run):
    """The HTML section's table has one row per knob (all of them, unlike the terminal) and the caution."""
    html = sensitivity_section(run)
    assert html.count("<tr>") == len(run.sensitivities) + 1
    assert "Sensitivities are local" in html
