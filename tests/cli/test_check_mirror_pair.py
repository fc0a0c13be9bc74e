"""`netloop check` without --at on a fully differential circuit measures both modes of its mirror pair: a requirement the
common-mode loop misses fails, where a break at one output printed PASS with a margin of neither loop."""

from __future__ import annotations

from dataclasses import replace
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


@pytest.mark.parametrize("order", [("vout<1>", "vout<0>"), ("vout<0>", "vout<1>")])
def test_the_pair_gives_one_verdict_in_either_order(installed_circuits, order):
    """testbench/fd_cmfb_hier.cir's CMFB loop oscillates (ngspice's transient grows at 6.6e6 /s near 3.4 MHz:
    tests/jobs/test_pair_deeper_names.py): the pair in either order is FAIL, DM passing and CM unstable. Swapping the nets
    changes T by about 2e-8 (the modal sums in the other order), and in one order the fit of the CM 1/(1+T) had a pair of
    damping -4e-4 at 3.97 MHz that the other lacked: 4 right-half-plane poles against the Nyquist count's 2, and the
    rhp-count check failed (INCONCLUSIVE). Such a pair's side is not settled by the data (netloop.analysis.poles.fits_count)."""
    pair = measure_pair(installed_circuits / "testbench" / "fd_cmfb_hier.cir", order)
    assert (pair.differential.verdict, pair.common.verdict, pair.common.stable) == ("pass", "fail", False)
    assert not pair.common.failed_checks and pair.common.analysis.nyquist.closed_loop_rhp_poles == 2


def test_a_pair_without_a_verdict_keeps_the_instability_one_net_finds(installed_circuits, monkeypatch):
    """When neither mode of the pair gives a verdict (here made so: every mode's result with a failed check), the group is
    measured at one net too, and the instability found there with every self-check passed stands: FAIL (unstable), with a
    warning that its margins are neither mode's, not INCONCLUSIVE. Reference: the oscillation of ngspice's transient above."""
    import netloop.jobs.discover as discover
    from netloop.analysis.results import Check
    from netloop.jobs.discover import check_loops

    measured = discover.measure_pair

    def doubted(*args, **kwargs):
        pair = measured(*args, **kwargs)
        doubt = Check("split", False, "made doubtful by the test", "none")
        return replace(pair, differential=replace(pair.differential, checks=(*pair.differential.checks, doubt)),
                       common=replace(pair.common, checks=(*pair.common.checks, doubt)))

    monkeypatch.setattr(discover, "measure_pair", doubted)
    (group,) = check_loops(installed_circuits / "testbench" / "fd_cmfb_hier.cir").groups
    assert group.verdict == "fail" and not group.result.stable and not group.result.failed_checks
    assert any("measured as the pair x1.outn,x1.outp, no mode gave a verdict (" in w and "neither mode's" in w for w in group.result.warnings), group.result.warnings


def test_the_census_names_the_pair_that_check_measures(capsys):
    """`netloop loops` says where check will measure a fully differential group as a pair (fd_amp_cmfb.cir: outn and outp,
    the pair of the test above), in the text and in --json's group entry; a single-ended circuit's groups have none."""
    import json

    assert main(["loops", str(FD)]) == 0
    assert "fully differential: outn and outp are mirror images, where `netloop check` measures both modes (--at-pair outn,outp)" in capsys.readouterr().out
    assert main(["loops", str(FD), "--json"]) == 0
    assert [g["pair"] for g in json.loads(capsys.readouterr().out)["groups"]] == [["outn", "outp"]]
    assert main(["loops", str(FD.parent / "miller_buffer.cir"), "--json"]) == 0
    assert [g["pair"] for g in json.loads(capsys.readouterr().out)["groups"]] == [None]
