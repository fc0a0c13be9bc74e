"""Test modules outside a package have names of their own: pytest imports them by file name, so two alike fail to collect."""

from __future__ import annotations

from collections import defaultdict
from pathlib import Path

TESTS = Path(__file__).resolve().parent


def test_test_modules_outside_packages_have_unique_names():
    """No two test modules in folders without __init__.py share a file name (pytest's default 'prepend' import mode puts
    each such folder on sys.path and imports the module by its bare name; a second one is an 'import file mismatch' error,
    pytest documentation, "Choosing an import mode")."""
    seen: dict[str, list[str]] = defaultdict(list)
    for path in sorted(TESTS.rglob("test_*.py")):
        if not (path.parent / "__init__.py").exists():
            seen[path.name].append(str(path.relative_to(TESTS)))
    assert {name: paths for name, paths in seen.items() if len(paths) > 1} == {}
