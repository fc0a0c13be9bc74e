"""analysis stage: return ratio, margins, Nyquist count, peaking and closed-loop poles (numpy/scipy only).

return_ratio   T from the probe's two runs: Tian et al. (2001), Middlebrook (1975)
response       checked data and its interpolant in log-frequency
crossovers     gain and phase crossovers, phase margin on the continuous branch
margins        worst phase margin, upper/lower gain margins, delay margin
closed_loop    modulus margin and the real peak of |T/(1+T)|
second_order   damping, Q, overshoot equivalent to a phase margin (estimates)
nyquist        encirclements of -1 and the verdict Z = N + P
poles          closed-loop poles from an AAA fit of 1/(1+T)
engine         analyse(): all of the above for one loop (analyse_draft, then finish: the same in two steps)
refine         more samples around crossovers until the margins settle
requirements   "pm>=60"-style pass/fail checks
checks         self-checks of the data: a failed one makes the loop "inconclusive"
results        the frozen result records
preload        the scipy modules, loaded on first use (or ahead of time, while ngspice runs)
"""

from netloop.analysis.engine import DEFAULT_FLOOR_DB, analyse
from netloop.analysis.refine import propose_frequencies, refine
from netloop.analysis.requirements import Requirement, RequirementOutcome, parse_requirement, parse_requirements
from netloop.analysis.results import (
    Check,
    ClosedLoopPoles,
    GainCrossover,
    LoopAnalysis,
    Margins,
    NyquistVerdict,
    Peaking,
    PhaseCrossover,
    Refinement,
    SecondOrderEstimate,
)
from netloop.analysis.return_ratio import middlebrook, sensitivity, tian

__all__ = [
    "Check",
    "ClosedLoopPoles",
    "DEFAULT_FLOOR_DB",
    "GainCrossover",
    "LoopAnalysis",
    "Margins",
    "NyquistVerdict",
    "Peaking",
    "PhaseCrossover",
    "Refinement",
    "Requirement",
    "RequirementOutcome",
    "SecondOrderEstimate",
    "analyse",
    "middlebrook",
    "parse_requirement",
    "parse_requirements",
    "propose_frequencies",
    "refine",
    "sensitivity",
    "tian",
]
