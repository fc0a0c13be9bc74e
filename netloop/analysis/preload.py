"""The scipy modules of the analysis stage, loaded on first use or ahead of time (e.g. while ngspice runs)."""

from __future__ import annotations

import importlib
import threading

__all__ = ["SCIPY_MODULES", "load_also", "load_scipy", "load_scipy_in_background"]

# scipy.optimize: crossovers (brentq); scipy.interpolate: the
# response spline and the AAA pole fit, whose clean-up of Froissart doublets imports scipy.stats.
# In this order each module's own scipy imports are already loaded.
SCIPY_MODULES = ("scipy.optimize", "scipy.interpolate", "scipy.stats")

_lock = threading.RLock()  # one thread at a time imports them, in one order: no import-lock cycles
_loaded = False
_started = False
_also: list[str] = []  # modules a caller wants loaded in the same background thread, after scipy's


def load_also(*modules: str) -> None:
    """Have load_scipy_in_background import ``modules`` too, after scipy's (the CLI adds its report stage: it then
    loads while ngspice reads the netlist instead of before). Names only: this stage imports none of them itself."""
    with _lock:
        _also.extend(m for m in modules if m not in _also)


def load_scipy() -> None:
    """Import every module of SCIPY_MODULES once (about half a second); later calls return at once.

    Every use of scipy in the analysis stage calls this first, so that the modules are loaded by
    one thread, in one order, even when several threads analyse at once.
    """
    global _loaded
    if _loaded:
        return
    with _lock:
        if not _loaded:
            for name in SCIPY_MODULES:
                importlib.import_module(name)
            _loaded = True


def _load_quietly() -> None:
    try:
        load_scipy()
        with _lock:
            also = list(_also)
        for name in also:
            importlib.import_module(name)
    except Exception:  # noqa: BLE001 - the analysis calls load_scipy again (the caller imports its modules) and a failure surfaces there
        pass


def load_scipy_in_background() -> None:
    """Start load_scipy in a thread, once per process, for a caller about to wait on something else
    (a simulation); an analysis that needs scipy sooner waits for that thread to finish."""
    global _started
    with _lock:
        if _started or _loaded:
            return
        _started = True
    threading.Thread(target=_load_quietly, name="netloop-load-scipy").start()
