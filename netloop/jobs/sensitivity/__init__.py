"""The sensitivity job: which values set a loop's margins, and what value of one meets a requirement.

knobs      the values that can change: R, C, L values, linear E/G/F/H gains, MOSFET W, L (and m), process device wrappers' sizes, per instance
remeasure  the measured loop again with values altered on the loaded circuit (a wrapper's size: on an edited copy): near its crossovers, or whole
slopes     central differences of PM, GM, fc and peaking for each knob (x e^+-h, x e^+-2h)
spread     knobs shared out to Dask workers when one ngspice would take long
whatif     bracket and solve the value of one knob that meets a requirement
edit       the solved value written into a copy of the netlist (one instance only), for a fresh check
records    Sensitivity, Slope, WhatIf, SensitivityRun
job        sensitivities(netlist, at, ...) -> SensitivityRun
"""

from netloop.jobs.sensitivity.job import DEFAULT_SPAN, DEFAULT_STEP, rank, sensitivities
from netloop.jobs.sensitivity.knobs import Knob, find_knobs, select_knobs
from netloop.jobs.sensitivity.records import (
    SENSITIVITY_CAUTION,
    Sensitivity,
    SensitivityRun,
    Slope,
    WhatIf,
)

__all__ = [
    "DEFAULT_SPAN",
    "DEFAULT_STEP",
    "SENSITIVITY_CAUTION",
    "Knob",
    "Sensitivity",
    "SensitivityRun",
    "Slope",
    "WhatIf",
    "find_knobs",
    "rank",
    "select_knobs",
    "sensitivities",
]
