"""``netloop demo``: check a bundled demo circuit and write its report, plots and JSON."""

from __future__ import annotations

import argparse
import json
from pathlib import Path

__all__ = ["DEMOS", "add_parser", "circuits_dir", "run"]

# name -> (netlist relative to circuits/, break node, one line on what it shows)
DEMOS: dict[str, tuple[str, str, str]] = {
    "buffer": ("miller_buffer.cir", "out", "two-stage Miller op-amp as a unity-gain buffer"),
    "ldo": ("ldo.cir", "fb", "low-dropout regulator, PMOS pass device, output capacitor with ESR"),
    "conditional": ("cond_stable.cir", "out", "conditionally stable loop: a lower and an upper gain margin"),
    "ac-coupled": ("testbench/ac_coupled.cir", "out", "capacitive feedback biased through 100 G: two crossovers"),
}


def circuits_dir() -> Path:
    """The bundled circuits folder (inside the package, so installed copies have it too)."""
    return (Path(__file__).resolve().parent.parent / "circuits").resolve()


def add_parser(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("name", nargs="?", default="buffer", choices=sorted(DEMOS), help="which demo circuit (default: buffer)")
    parser.add_argument("--out", default="netloop-demo", metavar="DIR", help="folder for the report, plots and JSON (default: netloop-demo)")


def run(args: argparse.Namespace) -> int:
    from netloop import report
    from netloop.jobs.measure import measure
    from netloop.report.files import output_file

    rel, node, what = DEMOS[args.name]
    netlist = circuits_dir() / rel
    out = Path(args.out)
    with output_file(out, "demo folder"):
        out.mkdir(parents=True, exist_ok=True)
    print(f"netloop demo: {what}\n  netlist {netlist}\n  break   {node}\n")
    result = measure(netlist, node, requirements=["pm>=45", "gm>=10"])
    print(report.format_text(result))
    report.plot_bode(result, out / "bode.png")
    report.plot_nyquist(result, out / "nyquist.png")
    report.write_html(result, out / "report.html")
    with output_file(out / "result.json", "JSON document") as path:
        path.write_text(json.dumps(report.to_document(result), indent=2, allow_nan=False) + "\n")
    print(f"\nwritten: {out / 'report.html'}, {out / 'bode.png'}, {out / 'nyquist.png'}, {out / 'result.json'}")
    from netloop.cli.main import exit_status

    return exit_status(result.verdict)
