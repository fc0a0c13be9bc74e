"""scipy (and what a caller adds) loads once, in its own named thread, ahead of the analysis; a failure there stays quiet."""

from __future__ import annotations

import importlib
import sys
import threading

import pytest

from netloop.analysis import preload

THREAD = "netloop-load-scipy"
MISSING = "netloop_no_such_module_for_this_test"


@pytest.fixture
def imports(monkeypatch):
    """A fresh process's state of the preload module, and the (module, thread name) of every import it makes from now on."""
    monkeypatch.setattr(preload, "_started", False)
    monkeypatch.setattr(preload, "_loaded", False)
    monkeypatch.setattr(preload, "_also", [])
    seen = []
    real = importlib.import_module

    def spy(name, package=None):
        if sys._getframe(1).f_globals["__name__"] == preload.__name__:  # scipy's own lazy imports use import_module too
            seen.append((name, threading.current_thread().name))
        return real(name, package)

    monkeypatch.setattr(preload.importlib, "import_module", spy)
    return seen


def _run(call):
    """Call, then wait for every thread the call started."""
    before = set(threading.enumerate())
    call()
    for thread in set(threading.enumerate()) - before:
        thread.join(timeout=60)


def test_background_load_imports_scipy_then_the_added_modules_once(imports):
    """load_scipy_in_background imports SCIPY_MODULES in their order, then each module load_also named (once, however often
    named), all in the thread netloop-load-scipy; a second call starts nothing (once per process, its docstring)."""
    preload.load_also("colorsys", "colorsys")
    preload.load_also("colorsys")
    _run(preload.load_scipy_in_background)
    assert imports == [(name, THREAD) for name in (*preload.SCIPY_MODULES, "colorsys")]
    assert preload._loaded
    _run(preload.load_scipy_in_background)
    assert imports == [(name, THREAD) for name in (*preload.SCIPY_MODULES, "colorsys")]


def test_a_second_request_while_loading_starts_nothing(imports):
    """A second request that comes while the first thread is still importing starts no second thread: each module is
    imported once (once per process, load_scipy_in_background's docstring)."""
    preload.load_also("colorsys")
    before = set(threading.enumerate())
    with preload._lock:  # the first thread cannot load before this block ends: the second request comes while it waits
        preload.load_scipy_in_background()
        preload.load_scipy_in_background()
    for thread in set(threading.enumerate()) - before:
        thread.join(timeout=60)
    assert imports == [(name, THREAD) for name in (*preload.SCIPY_MODULES, "colorsys")]


def test_nothing_starts_once_scipy_is_loaded(imports):
    """When an analysis has already loaded scipy, a later request to load it in the background starts no thread and imports
    nothing (its docstring: once per process)."""
    preload.load_scipy()
    assert imports == [(name, threading.current_thread().name) for name in preload.SCIPY_MODULES]
    imports.clear()
    preload.load_also("colorsys")
    _run(preload.load_scipy_in_background)
    assert imports == []


def test_a_module_that_fails_to_load_in_the_background_is_silent(imports, monkeypatch):
    """A module named by load_also that cannot be imported raises nothing out of the thread (the analysis imports what it
    needs again, and a failure surfaces there): scipy is still loaded first."""
    raised = []
    monkeypatch.setattr(threading, "excepthook", lambda args: raised.append(args.exc_type))
    preload.load_also(MISSING, "colorsys")
    _run(preload.load_scipy_in_background)
    assert raised == [] and preload._loaded
    assert [name for name, _ in imports] == [*preload.SCIPY_MODULES, MISSING]
