"""`netloop check` without --at on a fully differential circuit measures both modes of its mirror pair: a requirement the
common-mode loop misses fails, where a break at one output printed PASS with a margin of neither loop."""

from __future__ import annotations

from pathlib import Path

import pytest

from netloop.cli.main import main
from netloop.jobs.measure_pair import measure_pair

pytestmark = pytest.mark.ngspice

FD = Path(__file__).resolve().parent.parent.parent / "circuits" / "fd_amp_cmfb.cir"


def test_a_requirement_the_common_mode_misses_fails_without_at(capsys):
    """fd_amp_cmfb.cir: the census breaks at outn, whose mirror is outp; check measures the pair. Its two results are the
    modes `check --at-pair outp,outn` measures (Hurst and Lewis, 1995; the pair measurement is checked against hand-made
    expert pair probes in tests/circuits/test_pair_benches.py), and pm >= 50 fails on the common mode (47.7 deg) where the
    break at outn alone had printed PASS with 69.15 deg."""
    pair = measure_pair(FD, "outp,outn")
    want = {mode: r.analysis.margins.phase_margin_deg for mode, r in pair.modes.items()}
    assert want["common"] < 50 < want["differential"]
    assert main(["check", str(FD), "--require", "pm>=50"]) == 1
    out = capsys.readouterr().out
    assert out.startswith("FAIL  loop 1 (outn,outp differential mode): pass, loop 1 (outn,outp common mode): fail")
    for mode, pm in want.items():
        block = out.split(f"[loop 1 (outn,outp {mode} mode)]")[1]
        assert f"worst phase margin            {pm:.2f} deg" in block


def test_a_pair_without_a_verdict_keeps_the_instability_one_net_finds(installed_circuits):
    """testbench/fd_cmfb_hier.cir's CMFB loop oscillates (ngspice's transient grows at 6.6e6 /s near 3.4 MHz:
    tests/jobs/test_pair_deeper_names.py). Measured as the pair vout<0>,vout<1> neither mode gives a verdict (the common
    mode's fit contradicts itself there); the break at one net finds the circuit unstable with every self-check passed, an
    instability of the circuit whatever the break, so the group says FAIL (unstable) with a note on the pair, not
    INCONCLUSIVE."""
    from netloop.jobs.discover import check_loops

    (group,) = check_loops(installed_circuits / "testbench" / "fd_cmfb_hier.cir").groups
    assert group.verdict == "fail" and not group.result.stable and not group.result.failed_checks
    assert any("measured as the pair vout<0>,vout<1>, no mode gave a verdict" in w and "neither mode's" in w for w in group.result.warnings)
