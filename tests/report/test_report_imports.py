"""Importing the report stage stays light: matplotlib and jinja2 load only when a plot or a page is made."""

from __future__ import annotations

import subprocess
import sys


def test_import_does_not_load_matplotlib_or_jinja2():
    """A fresh interpreter that imports netloop.report has neither matplotlib nor jinja2 in sys.modules."""
    code = "import sys, netloop.report; print(sorted(m for m in ('matplotlib', 'jinja2') if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_report_imports_only_the_stages_below_it():
    """netloop.report imports no probe, sim, cli or measure module (data flows one way)."""
    code = (
        "import sys, netloop.report; "
        "print(sorted(m for m in sys.modules if m.startswith(('netloop.probe', 'netloop.sim', 'netloop.cli', 'netloop.jobs.measure', 'netloop.netlist', 'netloop.graph'))))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"
