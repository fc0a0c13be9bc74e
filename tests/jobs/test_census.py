"""The loop census: coarse figures of a sampled T, the choice of each group's break, and the same choices under any hash seed."""

from __future__ import annotations

import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from netloop.graph import flatten
from netloop.graph.loops import find_loops
from netloop.jobs.census import CoarseBreak, choose, coarse_figures
from netloop.netlist import parse_text

ROOT = Path(__file__).resolve().parent.parent.parent

# Three stages in a ring, each with 1k || 1n to ground: every node is on the one loop (by construction).
RING = """three-stage ring (invented)
G1 0 b a 0 2m
G2 0 c b 0 2m
G3 a 0 c 0 2m
Ra a 0 1k
Ca a 0 1n
Rb b 0 1k
Cb b 0 1n
Rc c 0 1k
Cc c 0 1n
.end
"""


def _group():
    (group,) = find_loops(flatten(parse_text(RING))).groups
    # every candidate as the probe's split states it: opens the loop (as netloop.jobs.discover.probe_splits would)
    return replace(group, candidates=tuple(replace(c, split_checked=True, opened=(1,), left_closed=()) for c in group.candidates))


def test_coarse_figures_of_a_known_return_ratio():
    """DC gain, peak, the 0 dB crossing and the top of the sweep of T = 10 / (1 + s/w)^2 match the closed form."""
    # Reference: closed form. |T| = 10 / (1 + (f/f0)^2) crosses 1 at f = f0 * sqrt(10 - 1) = 3 f0.
    f = np.logspace(-2, 12, 43)
    f0 = 1e3
    t = 10.0 / (1 + 1j * f / f0) ** 2
    c = coarse_figures("x", f, t)
    assert c.dc_db == pytest.approx(20.0, abs=1e-6) and c.peak_db == pytest.approx(20.0, abs=1e-6)
    assert c.unity_hz == pytest.approx(3 * f0, rel=0.05)  # interpolated between samples a third of a decade apart
    assert c.top_db == pytest.approx(20 - 40 * 9, abs=0.01) and c.falls and c.can_ring and not c.negligible


def test_a_break_where_t_is_about_0_or_does_not_fall_is_passed_over():
    """The best-ranked candidate measuring T about 0, and the next whose T stays flat at the top, give way to the third."""
    # Reference: by construction: the coarse figures are given; the rule is netloop.jobs.census's module docstring.
    group = _group()
    a, b, c = (x.node for x in group.candidates)
    coarse = (CoarseBreak(a, -200.0, -190.0, 1.0, None, -300.0), CoarseBreak(b, 20.0, 20.0, 1.0, 3e3, -15.0),
              CoarseBreak(c, 20.0, 20.0, 1.0, 3e3, -200.0))
    gc = choose(group, coarse)
    assert gc.chosen == c and gc.group.best.node == c and gc.group.label == f"loop 1 ({c})"
    assert [p.split(" (")[0] for p in gc.passed_over] == [a, b]
    assert "T is about 0" in gc.passed_over[0] and "does not fall" in gc.passed_over[1]
    assert gc.can_ring is True and "0 dB near 3 kHz" in gc.why


def test_a_break_that_can_ring_is_preferred_to_a_minor_loop():
    """When |T| exceeds 0 dB at some break, a break where |T| stays below 1 is passed over as a minor loop."""
    # Reference: by construction (as above).
    group = _group()
    a, b, _ = (x.node for x in group.candidates)
    gc = choose(group, (CoarseBreak(a, -8.0, -6.0, 1.0, None, -200.0), CoarseBreak(b, 10.0, 10.0, 1.0, 3e7, -200.0)))
    assert gc.chosen == b and "a minor loop" in gc.passed_over[0]


def test_a_group_measuring_nothing_anywhere_has_no_break():
    """When every candidate measures T about 0, no break is chosen and the reason says so (check reports it inconclusive)."""
    # Reference: by construction (as above).
    group = _group()
    coarse = tuple(CoarseBreak(x.node, -250.0, -240.0, 1.0, None, -300.0) for x in group.candidates)
    gc = choose(group, coarse)
    assert gc.chosen is None and gc.why.startswith("every break of this group measures T about 0") and gc.can_ring is None


def test_the_coarse_figures_thresholds_are_strict_as_their_words_say():
    """A break "can ring" when |T| exceeds 0 dB (exactly 0 dB does not, half a dB does), "measures nothing" when |T| stays
    below NEGLIGIBLE_DB (-60 dB) and "falls" when |T| at the top is below FALLS_DB (-20 dB): exactly at either limit, not."""
    # Reference: the thresholds as netloop.jobs.census documents them (common practice for -60 dB)
    from netloop.jobs.census import FALLS_DB, NEGLIGIBLE_DB

    def coarse(peak_db, top_db=-200.0):
        return CoarseBreak("x", peak_db, peak_db, 1.0, None, top_db)

    assert (NEGLIGIBLE_DB, FALLS_DB) == (-60.0, -20.0)
    assert [coarse(p).can_ring for p in (-3.0, 0.0, 0.5, 20.0)] == [False, False, True, True]
    assert [coarse(p).negligible for p in (-80.0, NEGLIGIBLE_DB, -59.5)] == [True, False, False]
    assert [coarse(20.0, top).falls for top in (-40.0, FALLS_DB, -19.5)] == [True, False, False]
    assert [coarse(None).can_ring, coarse(None).negligible, coarse(20.0, None).falls] == [False, False, False]


def test_a_group_is_named_by_its_break_and_by_its_number_when_none_is_chosen():
    """The census names a group by the break it chose (the group's label) or, when it chose none, "loop N"."""
    group = _group()
    a, b, c = (x.node for x in group.candidates)
    chosen = choose(group, (CoarseBreak(a, 20.0, 20.0, 1.0, 3e3, -200.0),))
    assert chosen.chosen == a and chosen.label == chosen.group.label == f"loop 1 ({a})"
    none = choose(group, tuple(CoarseBreak(x.node, -250.0, -240.0, 1.0, None, -300.0) for x in group.candidates))
    assert none.chosen is None and none.label == "loop 1"


@pytest.mark.ngspice
def test_coarse_sweep_of_a_linear_ring_matches_its_closed_form(tmp_path):
    """The census's coarse T of the three-stage ring at each node equals the closed form (each stage 2 / (1 + s tau))."""
    from netloop.jobs.discover import take_census

    census = take_census(RING)
    (gc,) = census.groups
    # Reference: closed form. Each stage has gm R = 2 (G1, G2 non-inverting, G3 inverting), so T(0) = 8 (negative feedback),
    # |T| = 8 / (1 + (f/fp)^3) with fp = 1/(2 pi 1k 1n) = 159 kHz; |T| = 1 at f = fp sqrt(8^(2/3) - 1) = fp sqrt(3).
    fp = 1 / (2 * np.pi * 1e3 * 1e-9)
    for c in gc.coarse:
        assert c.dc_db == pytest.approx(20 * np.log10(8), abs=1e-3)
        assert c.unity_hz == pytest.approx(fp * np.sqrt(3), rel=0.15)
    assert gc.chosen is not None and gc.can_ring


CAPPED = "every stage feeding every other (invented)\n" + "".join(
    f"G{i}_{j} 0 n{j} n{i} 0 1m\n" for i in range(7) for j in range(7) if i != j) + "".join(f"R{i} n{i} 0 1k\n" for i in range(7)) + ".end\n"

_CHOICES = r"""
import json, sys
from netloop.jobs.discover import take_census
from netloop.cli.loops_cmd import census_document
out = {}
for path, sweep, bounds in json.loads(sys.argv[1]):
    out[path] = census_document(take_census(path, sweep=sweep, **bounds))
print(json.dumps(out, sort_keys=True))
"""


@pytest.mark.ngspice
def test_every_choice_is_the_same_under_five_hash_seeds(under_hash_seeds):
    """Groups, labels, loops, candidate order, the sides of each split, the coarse figures and the chosen break are identical
    in five processes with different PYTHONHASHSEED (set and dict order of names never decide)."""
    # Reference: by construction: the same netlist must give the same census in every process.
    benches = ROOT / "circuits" / "benches"
    jobs = [(str(p), False, {}) for p in sorted(benches.glob("*.cir"))]
    jobs += [(str(p), False, {}) for p in (ROOT / "circuits" / "hier" / "top.cir", ROOT / "circuits" / "fd_amp_cmfb.cir")]
    jobs += [(str(benches / "bandgap_reg.cir"), True, {}), (str(benches / "fd_cap_amp.cir"), True, {})]
    # A group with more loops than listed (every stage of 7 feeding every other, 20 loops kept): which 20 are listed, and so
    # the candidates' order, followed networkx's set order before netloop enumerated cycles itself.
    jobs += [(CAPPED, False, {"max_loops": 20})]
    docs = [json.loads(o) for o in under_hash_seeds(_CHOICES, [json.dumps(jobs)], timeout_s=300)]
    assert all(d == docs[0] for d in docs[1:])
    assert docs[0][str(benches / "bandgap_reg.cir")]["groups"][0]["coarse"]  # the swept ones were swept


@pytest.mark.parametrize("unity_hz, shown", [(3e3, "0 dB near 3 kHz"), (3e6, "0 dB near 3 MHz"), (3e9, "0 dB near 3 GHz")])
def test_the_chosen_breaks_reason_names_its_crossing_in_si_units(unity_hz, shown):
    """The reason for a break states its coarse 0 dB crossing with the SI prefix a user reads (kHz, MHz, GHz)."""
    # Reference: common practice: SI prefixes k, M, G (BIPM SI brochure, 9th edition, 2019, table 7), capital M for mega.
    group = _group()
    a = group.candidates[0].node
    gc = choose(group, (CoarseBreak(a, 20.0, 20.0, 1.0, unity_hz, -200.0),))
    assert gc.chosen == a and shown in gc.why and "dB at 1 THz" in gc.why


def test_the_short_reasons_for_passed_over_breaks_word_for_word():
    """The text listing's short reasons read "T about 0" and "T does not fall", word for word."""
    # Reference: by construction (the rule of netloop.jobs.census's module docstring, as in the test above).
    group = _group()
    a, b, c = (x.node for x in group.candidates)
    coarse = (CoarseBreak(a, -200.0, -190.0, 1.0, None, -300.0), CoarseBreak(b, 20.0, 20.0, 1.0, 3e3, -15.0),
              CoarseBreak(c, 20.0, 20.0, 1.0, 3e3, -200.0))
    assert choose(group, coarse).passed_over_briefly == (f"{a}: T about 0", f"{b}: T does not fall")


def test_when_no_break_falls_the_best_measured_one_is_kept_and_the_reason_says_so():
    """When every candidate's T stays flat at the top of the sweep, the best-ranked measured one is still chosen, and why says
    no candidate's T falls."""
    # Reference: by construction: measure widens the sweep until T falls (netloop.jobs.census's module docstring), so a break
    # that was measured is better than none; the figures are given.
    group = _group()
    a, b, c = (x.node for x in group.candidates)
    coarse = (CoarseBreak(a, -200.0, -190.0, 1.0, None, -300.0), CoarseBreak(b, 20.0, 20.0, 1.0, 3e3, -15.0),
              CoarseBreak(c, 10.0, 10.0, 1.0, 3e3, -10.0))
    gc = choose(group, coarse)
    assert gc.chosen == b and gc.why.endswith(" (no candidate's T falls well below 1 at the top of the sweep)")
    assert gc.passed_over_briefly == (f"{a}: T about 0",)


def test_an_unswept_break_is_chosen_without_a_claim_about_its_t():
    """A break the coarse sweep did not reach is still chosen, and its reason claims nothing about T."""
    # Reference: by construction: with no coarse figures the census falls back on the structural ranking.
    group = _group()
    gc = choose(group, ())
    assert gc.chosen == group.candidates[0].break_name and "coarse T" not in gc.why and "falls" not in gc.why


def test_a_crossing_between_the_first_two_samples_is_found():
    """|T| = 2 / (1 + j f/f0) sampled at f0 and 10 f0 crosses 0 dB in the first interval, near f0 sqrt(3)."""
    # Reference: closed form: |T| = 1 at f = f0 sqrt(2^2 - 1); log-log interpolation between f0 and 10 f0 gives 1.5 f0.
    f0 = 1e3
    f = np.array([f0, 10 * f0, 100 * f0])
    c = coarse_figures("x", f, 2.0 / (1 + 1j * f / f0))
    assert c.unity_hz == pytest.approx(np.sqrt(3) * f0, rel=0.15)


def test_a_candidate_the_probe_refuses_in_the_coarse_sweep_is_never_chosen(monkeypatch):
    """A candidate whose break the probe refuses when the coarse sweep places it is recorded as refused, with the probe's
    words, and passed over: the census never hands the measurement a node the probe cannot break."""
    import netloop.jobs.census as census
    from netloop.errors import ProbeError

    group = _group()
    first = group.candidates[0].node

    def refusing(netlist, node, **kwargs):
        raise ProbeError(f"node {node}: refused here")

    monkeypatch.setattr(census, "break_loop", refusing)
    coarse = census.coarse_group(parse_text(RING), group, None, breaks=1)  # nothing placed: no simulator is asked
    assert coarse == (CoarseBreak(first, error=f"node {first}: refused here", refused=True),)
    gc = choose(group, coarse)
    assert gc.chosen is not None and gc.chosen != group.candidates[0].break_name  # the next, not swept, is taken instead


def test_the_coarse_unity_crossing_of_a_t_above_0_db_at_one_sample_only():
    """A band-pass T above 1 at one sample of the coarse sweep (0.5, 2, 0.5, 0.1 at 1 Hz to 1 kHz) crosses 0 dB downward
    between 10 and 100 Hz; between log samples the crossing is read on a straight line in log |T| against log f, which here
    puts it halfway, at 10^1.5 Hz (worked by hand). A mutant that read the sample two back found none there."""
    f = np.array([1.0, 10.0, 100.0, 1000.0])
    c = coarse_figures("x", f, np.array([0.5, 2.0, 0.5, 0.1]))
    assert c.unity_hz == pytest.approx(10**1.5, rel=1e-12) and c.peak_hz == 10.0
