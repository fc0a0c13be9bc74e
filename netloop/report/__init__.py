"""report stage: text, JSON, CSV, JUnit XML, plots and HTML from measured loops (formatting only).

notation   engineering notation, degrees and decibels as printed
document   the JSON document of a loop (schema "netloop.loop/1") and of several loops
text       the terminal summary of one loop, verdict first
"""

from netloop.report.document import SCHEMA, multi_document, to_document
from netloop.report.text import format_text, verdict_line

__all__ = ["SCHEMA", "format_text", "multi_document", "to_document", "verdict_line"]
