"""Shared plumbing of the plots: matplotlib imported lazily, figures made without pyplot, saved by file extension."""

from __future__ import annotations

import io
from collections.abc import Iterable, Sequence
from pathlib import Path

from netloop.errors import OutputError
from netloop.jobs.loop_result import LoopResult
from netloop.report.files import output_file

__all__ = ["FORMATS", "as_results", "file_format", "loop_name", "new_figure", "render", "save"]

FORMATS = ("png", "svg", "pdf")
"""File types the plots write, chosen by the extension of the path."""

DPI = 120
COLOURS = ("#1f5fa8", "#d2691e", "#2e8b57", "#8b3a8b", "#b22222", "#4a7f9a", "#7a6a00", "#555555")
"""Curve colours of overlays, one per loop, in legend order."""


def new_figure(width_in: float, height_in: float):
    """A matplotlib Figure not registered with pyplot (nothing to close, no GUI backend touched)."""
    from matplotlib.figure import Figure  # noqa: PLC0415 - lazy: `netloop --help` must not pay for matplotlib

    return Figure(figsize=(width_in, height_in), dpi=DPI, layout="constrained")


def file_format(path: str | Path) -> str:
    """The plot format named by the path's extension; OutputError (a ValueError) naming the accepted ones otherwise."""
    suffix = Path(path).suffix.lower().lstrip(".")
    if suffix not in FORMATS:
        raise OutputError(f"cannot write a plot to {str(path)!r}: expected a file name ending in {', '.join('.' + f for f in FORMATS)}")
    return suffix


def save(fig, path: str | Path, what: str = "plot") -> Path:
    """Write the figure to path in the format its extension names; returns the path (OutputError when it cannot)."""
    fmt = file_format(path)
    with output_file(path, what) as out:
        fig.savefig(out, format=fmt, dpi=DPI, metadata=_metadata(fmt))
    return out


def render(fig, fmt: str) -> bytes:
    """The figure as bytes of the given format ("png" or "svg"), for embedding."""
    buf = io.BytesIO()
    fig.savefig(buf, format=fmt, dpi=DPI, metadata=_metadata(fmt))
    return buf.getvalue()


def _metadata(fmt: str) -> dict:
    # no creation date in the file: the same data gives the same bytes
    if fmt == "svg":
        return {"Date": None}
    if fmt == "pdf":
        return {"CreationDate": None}
    return {}


def as_results(results: LoopResult | Iterable[LoopResult]) -> tuple[LoopResult, ...]:
    """One result or several, as a tuple; ValueError when empty."""
    out = (results,) if isinstance(results, LoopResult) else tuple(results)
    if not out:
        raise ValueError("nothing to plot: no loop results given")
    return out


def loop_name(result: LoopResult, results: Sequence[LoopResult]) -> str:
    """The legend name of a loop among several: its label, else its break node (with the netlist when they differ)."""
    if result.label:
        return result.label
    if len({r.netlist for r in results}) > 1:
        return f"{Path(result.netlist).name}: {result.breaks.node}"
    return result.breaks.node
