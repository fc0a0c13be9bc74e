"""The check "operating-point" in the jobs: the sources read from the flattened netlist, and the sky130 regulator's false solution."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pytest

from netloop.cli.main import main
from netloop.jobs.measure import measure
from netloop.jobs.measure_checks import OP_CHECK_MAX_ELEMENTS, op_check, op_sources, voltage_sources
from netloop.netlist import parse_text

ROOT = Path(__file__).resolve().parents[3]

NESTED = """a reference inside a block (invented)
.subckt ref top out
vshift top out dc 0.6
r1 out 0 10k
.ends
vdd vdd gnd dc 3.3
x1 vdd mid ref
vamm mid sense dc 0
rs sense 0 1k
.end
"""


def test_sources_are_read_from_the_flattened_netlist():
    """Sources inside subcircuits get their hierarchical nodes, gnd is ground, and a source with a node ngspice did not report is left out."""
    sources = voltage_sources(parse_text(NESTED))
    assert sources == (("vdd", "vdd", "0"), ("x1.vshift", "vdd", "mid"), ("vamm", "mid", "sense"))  # as flatten names them
    # vdd 3.3 V: range 0..3.3 V, span 3.3 V, limits -13.2 V and 16.5 V (the rule of netloop.analysis.checks, by hand)
    check = op_check(sources, {"vdd": 3.3, "mid": 2.7, "sense": 2.7, "x1.out": 2.7})
    assert check.passed and "the range 0 V to 3.3 V of the independent voltage sources (ground to vdd)" in check.detail
    # a node at -200 V lies beyond them (the sources' own voltages are what ngspice enforces, as in any solution)
    check = op_check(sources, {"vdd": 3.3, "mid": 2.7, "sense": 2.7, "x1.out": 2.7, "far": -200.0})
    assert not check.passed and "far at -200 V lie beyond" in check.detail
    # without a reading of vdd (or with none that is a number) neither vdd nor x1.vshift has a voltage, and vamm's is 0 V:
    # nothing sets a range
    assert op_check(sources, {"mid": 90.0, "sense": 90.0}).detail.startswith("not applicable")
    assert op_check(sources, {"vdd": float("nan"), "mid": 90.0, "sense": 90.0}).detail.startswith("not applicable")


@pytest.mark.parametrize("resistors, checked", [(OP_CHECK_MAX_ELEMENTS - 1, True), (OP_CHECK_MAX_ELEMENTS, False)])
def test_the_check_runs_on_circuits_up_to_its_size(resistors, checked):
    """A source and a chain of resistors: with OP_CHECK_MAX_ELEMENTS elements in all the sources are read, with one more the check is not run."""
    # the limit is our choice (netloop.jobs.measure_checks: beyond it a separate op costs as much as the sweeps)
    chain = "\n".join(f"r{k} n{k} n{k + 1} 1k" for k in range(resistors))
    sources = op_sources(parse_text(f"a resistor chain (invented)\nv1 n0 0 dc 1\n{chain}\n.end\n"))
    assert sources == ((("v1", "n0", "0"),) if checked else None)


def _regulator(tmp_path: Path, section: str, temp_c: float, supply_v: float) -> Path:
    """The sky130 regulator of benchmarks/corners_reuse.py (benchmarks/_sky130_regulator.py) at one corner, edited by hand."""
    spec = importlib.util.spec_from_file_location("_sky130_regulator", ROOT / "benchmarks" / "_sky130_regulator.py")
    bench = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(bench)
    text = bench.regulator(bench.sections_library(tmp_path / "sections.lib", (section,)), section)
    assert ".param vin=1.8 " in text
    text = text.replace(".param vin=1.8 ", f".param vin={supply_v:g} ").replace("\n.end\n", f"\n.temp {temp_c:g}\n.end\n")
    path = tmp_path / f"regulator_{section}.cir"
    path.write_text(text)
    return path


@pytest.mark.ngspice
def test_the_false_sky130_operating_point_is_inconclusive(tmp_path, capsys):
    """At ss / 125 C / 1.7 V ngspice's operating point puts fb near -409 V: `netloop check` says INCONCLUSIVE (exit 3) and names this check first."""
    # reference: plain ngspice 39 `op` on this very netlist gives v(fb) = -409.358 V, v(vout) = 1.867 V, v(gate) = 2.1e-8 V
    # (the xhigh_po divider's voltage coefficients make its resistance negative there)
    path = _regulator(tmp_path, "ss", 125, 1.7)
    assert main(["check", str(path), "--at", "gate"]) == 3
    first = capsys.readouterr().out.splitlines()[0]
    assert first.startswith("INCONCLUSIVE  the data supports no verdict: the operating point ngspice returned is not credible: fb at -409.4 V")
    assert "-6.8 V to 8.5 V" in first


@pytest.mark.ngspice
def test_the_regulator_at_its_typical_corner_still_passes(tmp_path):
    """At tt / 27 C / 1.8 V the operating point is the real one (every node within the rails): the check passes and so does the loop."""
    # reference: plain ngspice 39 `op` on this netlist: v(fb) = 0.9003 V, v(vout) = 1.357 V, v(gate) = 0.639 V, all within 0..1.8 V
    result = measure(_regulator(tmp_path, "tt", 27, 1.8), "gate")
    op = result.analysis.checks[0]
    assert op.name == "operating-point" and op.passed and "-7.2 V to 9 V" in op.detail
    assert result.verdict == "pass"


# a 10 mA current source into 100 kOhm that nothing else holds: "far" sits at 1000 V (closed form, I R), hundreds of
# spans beyond the 0-3.3 V of fd_amp_cmfb.cir's supply (the limits of the rule, by hand: -13.2 V and 16.5 V)
FAR = "ibig 0 far dc 10m\nrbig far 0 100k\n.end"


@pytest.mark.ngspice
def test_pairs_and_comparisons_carry_the_check(tmp_path):
    """measure_pair and compare read the operating point too: a node at 1000 V makes every mode and location inconclusive."""
    from netloop.jobs.compare import compare  # noqa: PLC0415 - the jobs under test, side by side
    from netloop.jobs.measure_pair import measure_pair  # noqa: PLC0415

    path = tmp_path / "fd_amp_cmfb.cir"
    path.write_text((ROOT / "circuits" / "fd_amp_cmfb.cir").read_text().replace("\n.end", "\n" + FAR, 1))
    (tmp_path / "models").symlink_to(ROOT / "circuits" / "models")
    pair = measure_pair(path, "outp,outn")
    comparison = compare(path, ["outp", "cmfb"])
    for result in (*pair.modes.values(), *comparison.results):
        op = result.analysis.checks[0]
        assert op.name == "operating-point" and not op.passed and "far at 1000 V" in op.detail and "-13.2 V to 16.5 V" in op.detail
        assert result.verdict == "inconclusive"
