"""The package layers: no import runs against the stage order written in DEVELOPERS.md, and no modules import each other in a cycle."""

from __future__ import annotations

import ast
import re
from pathlib import Path

import networkx as nx
import pytest

ROOT = Path(__file__).resolve().parent.parent
PACKAGE = ROOT / "netloop"


def stage_order() -> list[str]:
    """The order DEVELOPERS.md states on its 'stage order:' line, lowest first."""
    text = (ROOT / "DEVELOPERS.md").read_text()
    match = re.search(r"^\s*stage order:\s*(.+)$", text, re.M)
    assert match, "DEVELOPERS.md lost its 'stage order: a < b < ...' line"
    return [name.strip() for name in match.group(1).split("<")]


def module_name(path: Path, root: Path = ROOT) -> str:
    parts = list(path.relative_to(root).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def is_module(name: str) -> bool:
    base = PACKAGE.parent / name.replace(".", "/")
    return base.with_suffix(".py").exists() or (base / "__init__.py").exists()


def imports_of(path: Path, module: str) -> list[tuple[str, int]]:
    """Every netloop module that ``path`` (the module ``module``) imports, anywhere in the file:
    inside functions and under TYPE_CHECKING too. ``from a.b import c`` counts a.b, and a.b.c when c is a module."""
    package = module if path.name == "__init__.py" else module.rsplit(".", 1)[0]
    found = []
    for node in ast.walk(ast.parse(path.read_text(), str(path))):
        if isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                up = package.split(".")[: len(package.split(".")) - node.level + 1]
                base = ".".join([*up, base] if base else up)
            if base == "netloop" or base.startswith("netloop."):
                found.append((base, node.lineno))
                found.extend((f"{base}.{a.name}", node.lineno) for a in node.names if is_module(f"{base}.{a.name}"))
        elif isinstance(node, ast.Import):
            found.extend((a.name, node.lineno) for a in node.names if a.name == "netloop" or a.name.startswith("netloop."))
    return found


def layer(module: str) -> str:
    """The top-level part of netloop a module belongs to ("netloop" for the package root)."""
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else "netloop"


def upward_imports(path: Path, module: str) -> list[str]:
    """The imports of one module that run against the stage order (the package root's lazy exports are only for users and the CLI)."""
    order = {name: rank for rank, name in enumerate(stage_order())}
    here = layer(module)
    if here == "netloop":
        return []  # the root resolves its exports from strings on first use
    upward = []
    for target, line in imports_of(path, module):
        there = layer(target)
        if there == "netloop":
            if here != "cli":
                upward.append(f"line {line}: {target} (the package root is for users and the CLI)")
        elif order[there] > order[here]:
            upward.append(f"line {line}: {target} ({there} comes after {here})")
    return upward


SOURCES = sorted(PACKAGE.rglob("*.py"))


def test_the_stage_order_names_every_package():
    """Every subpackage and top-level module of netloop has a place in the written order."""
    order = stage_order()
    present = {p.name for p in PACKAGE.iterdir() if p.is_dir() and (p / "__init__.py").exists()}
    present |= {p.stem for p in PACKAGE.glob("*.py") if p.name != "__init__.py"}
    assert present <= set(order), f"not in DEVELOPERS.md's stage order: {sorted(present - set(order))}"


@pytest.mark.parametrize("path", SOURCES, ids=lambda p: str(p.relative_to(ROOT)))
def test_no_import_runs_upward(path):
    """A module imports only from its own layer or a lower one."""
    upward = upward_imports(path, module_name(path))
    assert not upward, f"{path.relative_to(ROOT)} imports upward: " + "; ".join(upward)


def test_no_module_import_cycles():
    """No two modules import each other, directly or round a longer cycle (a package's __init__ re-exporting its own modules aside)."""
    graph = nx.DiGraph()
    inits = {module_name(p) for p in SOURCES if p.name == "__init__.py"}
    for path in SOURCES:
        source = module_name(path)
        for target, _ in imports_of(path, source):
            if target == source or layer(target) == "netloop":
                continue
            if target in inits and (source + ".").startswith(target + "."):
                continue  # a module importing through its own package's __init__
            if source in inits and target.startswith(source + "."):
                continue  # an __init__ re-exporting its own modules
            graph.add_edge(source, target)
    cycles = sorted(nx.simple_cycles(graph))
    assert not cycles, f"import cycles: {cycles[:5]}"


def test_the_checker_sees_planted_upward_imports(tmp_path):
    """The walk finds an upward import hidden in a function and one under TYPE_CHECKING, so the tests above can fail."""
    planted = tmp_path / "planted.py"
    planted.write_text(
        "from typing import TYPE_CHECKING\n"
        "if TYPE_CHECKING:\n    from netloop.jobs.loop_result import LoopResult\n"
        "def f():\n    from netloop.report import format_text\n"
        "from netloop.netlist import parse_text\n"
    )
    upward = upward_imports(planted, "netloop.sim.planted")
    assert len(upward) == 2 and "jobs comes after sim" in upward[0] and "report comes after sim" in upward[1]
