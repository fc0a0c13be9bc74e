"""measure checks the loop while the first simulation runs: the outcome is break_loop's, as if checked first."""

from __future__ import annotations

import pytest

from netloop.errors import ProbeError, SimulationError
from netloop.jobs.measure import measure
from netloop.netlist import parse_text
from netloop.probe import break_loop

# circuit theory: node b of this chain returns to nothing (no path from its load r2 back to its driver r1).
OPEN_CHAIN = "open chain\nvin in 0 dc 0 ac 1\ne1 a 0 in 0 10\nr1 a b 1k\nr2 b c 1k\nc1 c 0 1n\n.end\n"
# Node out closes two loops, through r1 and through e2 (the circuit of tests/probe/test_sides.py::test_several_loops_warn).
TWO_LOOPS = "two loops\nVin in 0 dc 0 ac 1\nG1 0 out x 0 1m\nRo out 0 10k\nE1 x 0 y 0 -1\nR1 out y 1k\nR2 y 0 1k\nE2 x2 0 out 0 1\nR3 x2 x 1k\n.end\n"


class _FailingSimulator:
    """A simulator without abort() whose every job fails, counting the jobs it was given."""

    backend = "failing"

    def __init__(self) -> None:
        self.jobs = 0

    def run(self, job):
        self.jobs += 1
        raise SimulationError("the simulator failed")


def test_node_on_no_loop_raises_the_probe_refusal_not_the_simulation_error():
    """For a node on no loop measure raises break_loop's own ProbeError, after the abandoned job ended, never the job's error."""
    simulator = _FailingSimulator()
    with pytest.raises(ProbeError) as direct:
        break_loop(parse_text(OPEN_CHAIN), "b")  # Reference: the one-step break_loop
    with pytest.raises(ProbeError) as caught:
        measure(OPEN_CHAIN, "b", simulator=simulator)
    assert str(caught.value) == str(direct.value)
    assert simulator.jobs <= 1


@pytest.mark.ngspice
@pytest.mark.parametrize("processes", [1, 2])
def test_node_on_no_loop_with_the_default_simulator(processes):
    """With netloop's own ngspice simulator, one process or two sharing the runs, a node on no loop is refused with
    break_loop's message (the running job is abandoned in every process)."""
    with pytest.raises(ProbeError) as direct:
        break_loop(parse_text(OPEN_CHAIN), "b")  # Reference: the one-step break_loop
    with pytest.raises(ProbeError) as caught:
        measure(OPEN_CHAIN, "b", processes=processes)
    assert str(caught.value) == str(direct.value)


@pytest.mark.ngspice
def test_loop_warnings_reach_the_result():
    """The loop warnings found during the first simulation are in the result, as break_loop gives them."""
    expected = break_loop(parse_text(TWO_LOOPS), "out").warnings  # Reference: the one-step break_loop
    assert expected
    result = measure(TWO_LOOPS, "out")
    assert all(w in result.warnings for w in expected)
