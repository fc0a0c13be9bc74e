"""tools/mutate.py never prints a kill rate from an earlier run's verdicts when mutmut gave up before testing."""

from __future__ import annotations

import importlib.util
import subprocess
from pathlib import Path

import pytest

TOOL = Path(__file__).resolve().parents[1] / "tools" / "mutate.py"


def _tool():
    spec = importlib.util.spec_from_file_location("mutate_tool", TOOL)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_a_stopped_mutmut_run_gives_no_figures(tmp_path, monkeypatch):
    """mutmut 3.8.1 exits 1 after "failed to collect stats" (a test failing under its wrappers): the script stops with a
    message instead of going on to list the copy's old verdicts; a run that tested its mutants (exit 0) goes on."""
    mutate = _tool()
    calls = []

    def fake(work, *args, quiet=False):
        calls.append(args)
        return subprocess.CompletedProcess(["mutmut", *args], returncode=1 if "bad" in args else 0)

    monkeypatch.setattr(mutate, "_mutmut", fake)
    mutate.run_mutants(tmp_path, 2, "good")
    with pytest.raises(SystemExit, match="stopped before testing.*earlier run's"):
        mutate.run_mutants(tmp_path, 2, "bad")
    assert calls == [("run", "--max-children", "2", "good"), ("run", "--max-children", "2", "bad")]


SAMPLE = '''"""A module with properties, as netloop writes them."""
from dataclasses import dataclass


@dataclass(frozen=True, slots=True)
class Result:
    margin: float
    checks: tuple = ()

    @property
    def verdict(self) -> str:
        """PASS when the margin is met."""
        if self.margin >= 45.0:
            return "pass"
        return "fail"

    @property  # the count of checks
    def count(self) -> int:
        return len(self.checks)

    def plain(self) -> float:
        return self.margin


class Settable:
    def __init__(self):
        self._v = 1

    @property
    def v(self):
        return self._v

    @v.setter
    def v(self, value):
        self._v = value

    class Inner:
        @property
        def deep(self):
            return 3


LIMIT = 45.0
'''


def test_properties_become_plain_methods_for_mutmut_and_stay_properties():
    """mutmut 3.8.1 makes no mutant of a decorated function, and netloop's verdicts are properties: in the scratch copy a
    top-level class's @property becomes a plain method (no decorator left for mutmut to skip), wrapped again at the end of
    the module, so the module behaves as before; no line moves; a property with a setter, or of a nested class, stays."""
    import ast

    mutate = _tool()
    text, names = mutate.unwrap_properties(SAMPLE)
    assert names == ["x\u01c1Result\u01c1verdict", "x\u01c1Result\u01c1count"]
    before, after = SAMPLE.split("\n"), text.split("\n")
    assert [i for i, (a, b) in enumerate(zip(before, after)) if a != b] == [i for i, line in enumerate(before) if "@property" in line][:2]
    functions = {node.name: node for node in ast.walk(ast.parse(text)) if isinstance(node, ast.FunctionDef)}
    assert functions["verdict"].decorator_list == [] and functions["count"].decorator_list == []
    assert len(functions["deep"].decorator_list) == 1  # nested: left as it is
    old, new = {}, {}
    exec(compile(SAMPLE, "sample", "exec"), old)
    exec(compile(text, "sample", "exec"), new)
    for margin in (30.0, 45.0, 60.0):
        a, b = old["Result"](margin, (1, 2)), new["Result"](margin, (1, 2))
        assert (a.verdict, a.count, a.plain()) == (b.verdict, b.count, b.plain())
    assert isinstance(new["Result"].__dict__["verdict"], property) and isinstance(new["Result"].__dict__["count"], property)
    settable = new["Settable"]()
    settable.v = 5
    assert settable.v == 5 and new["Settable"].Inner().deep == 3
    assert mutate.unwrap_properties("x = 1\n") == ("x = 1\n", [])


def test_every_property_of_netloop_is_unwrapped_and_the_modules_still_import(tmp_path):
    """The copy's modules, unwrapped, import and keep each property a property (netloop.jobs.loop_result: the verdict of
    `netloop check`)."""
    import shutil
    import sys

    mutate = _tool()
    root = Path(__file__).resolve().parents[1]
    shutil.copytree(root / "netloop", tmp_path / "netloop", dirs_exist_ok=True, ignore=shutil.ignore_patterns("__pycache__"))
    found = mutate._unwrap_copy(tmp_path)
    assert "x\u01c1LoopResult\u01c1verdict" in found["netloop.jobs.loop_result"]
    assert sum(map(len, found.values())) >= 100
    code = ("import importlib, json, sys; found = json.load(open('properties.json'));"
            "bad = [(m, n) for m, names in found.items() for n in names"
            " if not isinstance(vars(importlib.import_module(m))[n.split('\u01c1')[1]].__dict__[n.split('\u01c1')[2]], property)];"
            "print(bad)")
    run = subprocess.run([sys.executable, "-c", code], cwd=tmp_path, capture_output=True, text=True, check=True,
                         env={"PATH": "/usr/bin:/bin", "PYTHONPATH": str(tmp_path)})
    assert run.stdout.strip() == "[]", run.stderr


def test_a_worker_process_s_hits_reach_mutmut_s_map_of_the_test(tmp_path, monkeypatch):
    """In mutmut's stats run, a process started with tools/ on PYTHONPATH (an ngspice worker) writes each function it
    reaches to a file of its own (tools/sitecustomize.py), and the watchdog plugin hands the names to mutmut at the end of
    the test, emptying the file for the next; outside the stats run the process records nothing."""
    import os  # noqa: PLC0415
    import sys  # noqa: PLC0415

    tools = TOOL.parent
    child = ("from mutmut.mutation import trampoline\n"
             "trampoline.record_trampoline_hit('netloop.sim.session_job.x__run')\n"
             "trampoline.record_trampoline_hit('netloop.sim.session.xǁNgspiceSessionǁload')\n")
    env = {**os.environ, "PYTHONPATH": str(tools), "MUTATE_CHILD_HITS": str(tmp_path), "MUTANT_UNDER_TEST": "stats"}
    subprocess.run([sys.executable, "-c", child], env=env, check=True, timeout=60, cwd=tmp_path)
    (hits,) = tmp_path.glob("*.hits")
    assert hits.read_text().split() == ["netloop.sim.session_job.x__run", "netloop.sim.session.xǁNgspiceSessionǁload"]

    spec = importlib.util.spec_from_file_location("mutate_watchdog_under_test", tools / "mutate_watchdog.py")
    plugin = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(plugin)
    from mutmut.state import state  # noqa: PLC0415

    monkeypatch.setenv("MUTANT_UNDER_TEST", "stats")
    monkeypatch.setenv("MUTATE_CHILD_HITS", str(tmp_path))
    before = set(state()._stats)
    try:
        plugin.pytest_runtest_teardown(None, None)
        assert set(state()._stats) - before == {"netloop.sim.session_job.x__run", "netloop.sim.session.xǁNgspiceSessionǁload"}
        assert hits.read_text() == ""
    finally:
        state()._stats.clear()
        state()._stats.update(before)

    hits.unlink()
    env["MUTANT_UNDER_TEST"] = ""  # the clean run, or a mutant's: mutmut's own recorder is left alone
    subprocess.run([sys.executable, "-c", "from mutmut.mutation import trampoline\n"
                    "assert trampoline.record_trampoline_hit.__module__ == 'mutmut.stats'"], env=env, check=True, timeout=60, cwd=tmp_path)
    assert not list(tmp_path.glob("*.hits"))
