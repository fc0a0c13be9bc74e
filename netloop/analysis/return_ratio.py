"""Bode's return ratio T from the two probe runs: Tian et al. (2001) and Middlebrook (1975).

The probe splits the break node into ``a`` (driver side) and ``b`` (load side) with a series
voltage source (v_b - v_a = v_s) and a shunt current source into ``a``.

* Run 1: v_s = 1, shunt = 0  -> ``va1``, ``vb1`` (node voltages).
* Run 2: v_s = 0, shunt = 1 A -> ``ib2``: the current delivered by the probe into the load side
  ``b``; ``ia2 = ib2 - 1`` is the current arriving at the probe from the driver side.

All functions take numpy arrays (or scalars) of complex phasors and broadcast; they never divide
by ``ib2``, which is exactly 0 for an ideal voltage driver.
"""

from __future__ import annotations

import numpy as np

__all__ = ["middlebrook", "sensitivity", "tian"]


def tian(va1, vb1, ib2) -> np.ndarray:
    """Return ratio by Tian et al. (2001): T = -(va1 + ib2) / (vb1 + ib2).

    Written in this form, not as 1/S - 1, so that |T| far below 1 keeps its relative precision.
    """
    va1, vb1, ib2 = (np.asarray(x, dtype=complex) for x in (va1, vb1, ib2))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):  # a sample that is not finite is judged by analyse()
        return -(va1 + ib2) / (vb1 + ib2)


def sensitivity(vb1, ib2) -> np.ndarray:
    """The closed loop's sensitivity S = 1 / (1 + T) = vb1 + ib2 (Tian et al., 2001)."""
    return np.asarray(vb1, dtype=complex) + np.asarray(ib2, dtype=complex)


def middlebrook(va1, vb1, ia2, ib2) -> np.ndarray:
    """Return ratio by Middlebrook's double injection (1975), cross-multiplied.

    With Tv = -va1/vb1 and Ti = -ia2/ib2, T = (Tv Ti - 1) / (Tv + Ti + 2); multiplying through
    by vb1 ib2 gives T = (va1 ia2 - vb1 ib2) / (2 vb1 ib2 - va1 ib2 - ia2 vb1), which stays finite
    when ib2 = 0 (an ideal voltage driver, where the textbook form gives NaN).
    """
    va1, vb1, ia2, ib2 = (np.asarray(x, dtype=complex) for x in (va1, vb1, ia2, ib2))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):  # a sample that is not finite is judged by analyse()
        return (va1 * ia2 - vb1 * ib2) / (2.0 * vb1 * ib2 - va1 * ib2 - ia2 * vb1)
