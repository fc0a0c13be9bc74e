"""How samples enter the statistics: counted by hand on made-up records, bounds from scipy's exact binomial intervals."""

from __future__ import annotations

import statistics

import numpy as np
import pytest
from scipy.stats import binomtest

from netloop.jobs.statistics import EVERY, STABLE, statistics_part, summarise


def record(corner: str, seed: int, outcome: str, pm: float | None = 60.0, *, met: bool = True, stable: bool = True,
           gm: float | None = 20.0, infinite_gm: bool = False) -> dict:
    """A results-file record of one sample as a worker writes it (only the keys the statistics read)."""
    loop = None
    if outcome != "error":
        loop = {
            "requirements": [{"text": "pm >= 45", "passed": met}],
            "stability": {"stable": stable},
            "checks": [{"name": "nyquist-data", "passed": outcome != "inconclusive", "detail": "Z = N + P < 0", "advice": ""}],
            "margins": {"phase_margin_deg": pm, "gain_margin_db": gm, "unity_gain_hz": 1e6},
            "peaking": {"peak_db": 0.5},
            "infinite": {"margins.gain_margin_db": "+inf"} if infinite_gm else {},
        }
    return {"corner": f"{corner}#{seed}", "at": "out", "settings": {"seed": str(seed)}, "outcome": outcome,
            "error": "op did not converge" if outcome == "error" else None, "loop": loop}


def test_samples_without_a_verdict_count_against_the_yield_and_for_its_upper_bound():
    """7 pass, 1 fails, 1 is inconclusive, 1 not measured: yield 7/10; lower bound of 7 in 10, upper bound of 9 in 10."""
    recs = [record("tt", s, "pass") for s in range(1, 8)] + [record("tt", 8, "fail", 40.0, met=False),
                                                             record("tt", 9, "inconclusive"), record("tt", 10, "error")]
    y = summarise(recs, ["pm >= 45"]).yields_of("pm >= 45")[0]
    assert (y.samples, y.passed, y.failed, y.no_verdict, y.estimate) == (10, 7, 1, 2, 0.7)
    assert y.lower == pytest.approx(binomtest(7, 10, alternative="greater").proportion_ci(0.95, "exact").low, abs=1e-9)
    assert y.upper == pytest.approx(binomtest(9, 10, alternative="less").proportion_ci(0.95, "exact").high, abs=1e-9)
    assert y.interval == pytest.approx(tuple(binomtest(7, 10).proportion_ci(0.95, "exact")), abs=1e-9)


def test_a_die_passes_only_where_it_passes_at_every_corner():
    """Seed 1 passes at both corners, seed 2 fails at one, seed 3 is inconclusive at one: the dies' yield is 1 pass,
    1 fail, 1 without a verdict; each corner's own yield counts its samples alone."""
    recs = [record("cold", 1, "pass"), record("cold", 2, "pass"), record("cold", 3, "pass"),
            record("hot", 1, "pass"), record("hot", 2, "fail", 40.0, met=False), record("hot", 3, "inconclusive")]
    stats = summarise(recs, ["pm >= 45"])
    cold, hot, dies = stats.yields_of("pm >= 45")
    assert (cold.corner, cold.passed, hot.corner, hot.passed, hot.failed, hot.no_verdict) == ("cold", 3, "hot", 1, 1, 1)
    assert (dies.corner, dies.samples, dies.passed, dies.failed, dies.no_verdict) == ("", 3, 1, 1, 1)
    assert stats.deciding == stats.yields_of(EVERY)[-1] and stats.deciding.corner == ""


def test_an_unstable_sample_fails_stability_and_every_requirement():
    """A sample the Nyquist count calls unstable fails the stable yield and the samples' own verdict."""
    stats = summarise([record("tt", 1, "fail", -5.0, met=False, stable=False), record("tt", 2, "pass")], ["pm >= 45"])
    assert [(y.passed, y.failed) for y in (*stats.yields_of(STABLE), *stats.yields_of(EVERY))] == [(1, 1), (1, 1)]
    assert stats.worst[0].why == "unstable"


@pytest.mark.parametrize("passes,fails,target,verdict", [(300, 0, 0.99, "pass"), (80, 20, 0.95, "fail"), (20, 0, 0.99, "inconclusive"),
                                                         (295, 5, 0.99, "inconclusive")])
def test_a_target_decides_on_the_bounds(passes, fails, target, verdict):
    """PASS when the lower bound reaches the target, FAIL when the upper bound stays below it, else INCONCLUSIVE."""
    recs = [record("tt", s, "pass") for s in range(1, passes + 1)]
    recs += [record("tt", passes + s, "fail", 40.0, met=False) for s in range(1, fails + 1)]
    assert summarise(recs, ["pm >= 45"], target=target).verdict == verdict


def test_inconclusive_samples_never_pass_a_target():
    """300 samples of which 3 are inconclusive: the lower bound (3 counted failing) misses 99 %, and the upper bound
    (3 counted passing) does not rule it out, so the verdict is INCONCLUSIVE, not PASS."""
    recs = [record("tt", s, "pass") for s in range(1, 298)] + [record("tt", s, "inconclusive") for s in (298, 299, 300)]
    stats = summarise(recs, ["pm >= 45"], target=0.99)
    assert stats.verdict == "inconclusive" and stats.deciding.no_verdict == 3


@pytest.mark.parametrize("outcomes,verdict", [(("pass", "pass"), "pass"), (("pass", "inconclusive"), "inconclusive"),
                                              (("inconclusive", "fail"), "fail"), (("pass", "error"), "fail")])
def test_without_a_target_every_sample_must_pass(outcomes, verdict):
    """Without a target the run is judged as a corner run: any failure or unmeasured sample fails it, else any sample
    without a verdict makes it inconclusive."""
    recs = [record("tt", i + 1, o, 40.0 if o == "fail" else 60.0, met=o != "fail") for i, o in enumerate(outcomes)]
    assert summarise(recs, ["pm >= 45"]).verdict == verdict


def test_spreads_are_over_the_samples_with_a_verdict():
    """Mean and standard deviation (n - 1) of the phase margins of the judged samples (statistics.stdev as reference);
    the inconclusive one is left out and said so; a gain margin that does not exist or is infinite is counted apart."""
    pms = [50.0, 52.5, 61.0, 58.25]
    recs = [record("tt", i + 1, "pass", pm) for i, pm in enumerate(pms)]
    recs += [record("tt", 5, "inconclusive", 10.0), record("tt", 6, "pass", 55.0, gm=None), record("tt", 7, "pass", 57.0, gm=None, infinite_gm=True)]
    spreads = {s.figure: s for s in summarise(recs, []).spreads}
    judged = [*pms, 55.0, 57.0]
    pm = spreads["pm"]
    assert (pm.count, pm.without_verdict, pm.min, pm.max) == (6, 1, 50.0, 61.0)
    assert pm.mean == pytest.approx(statistics.fmean(judged), rel=1e-15) and pm.std == pytest.approx(statistics.stdev(judged), rel=1e-12)
    gm = spreads["gm"]
    assert (gm.count, gm.missing, gm.infinite, gm.mean) == (4, 1, 1, 20.0)


def test_worst_samples_come_unmeasured_first_then_without_verdict_then_failed_then_lowest_margin():
    """The worst list runs error, inconclusive, fail, then passing samples by phase margin, each with its seed."""
    recs = [record("tt", 1, "pass", 70.0), record("tt", 2, "pass", 48.0), record("tt", 3, "fail", 44.0, met=False),
            record("tt", 4, "error"), record("tt", 5, "inconclusive", 80.0), record("tt", 6, "pass", 46.0)]
    worst = summarise(recs, ["pm >= 45"]).worst
    assert [(w.seed, w.verdict) for w in worst] == [(4, "error"), (5, "inconclusive"), (3, "fail"), (6, "pass"), (2, "pass"), (1, "pass")]
    assert worst[0].why == "op did not converge" and worst[1].why == "nyquist-data: Z = N + P < 0" and worst[2].why == "pm >= 45"


def test_samples_needed_use_the_failure_rate_seen():
    """Target 99 % at 95 %: 299 samples with no failure (ln 0.05 / ln 0.99, rounded up); at 1 failure in 400 seen,
    the count where a quarter-percent of failures still shows 99 %."""
    recs = [record("tt", s, "pass") for s in range(1, 400)] + [record("tt", 400, "fail", 40.0, met=False)]
    needed = summarise(recs, ["pm >= 45"], target=0.99).needed
    assert (needed.with_no_failure, needed.rate_seen) == (299, 1 / 400)
    assert needed.at_rate_seen > 299


def test_an_inconclusive_sample_has_no_stability_verdict():
    """A sample whose self-checks failed says nothing of stability, whatever its Nyquist count read: it counts as no
    verdict in the stable yield (the verdict model: never "stable" or "unstable" for a measurement that has not checked
    itself), and its why names the failed check, or says a self-check failed when the record names none."""
    bare = record("tt", 3, "inconclusive")
    bare["loop"]["checks"] = []
    stats = summarise([record("tt", 1, "inconclusive"), record("tt", 2, "pass"), bare], ["pm >= 45"])
    (stable,) = stats.yields_of(STABLE)
    assert (stable.samples, stable.passed, stable.failed, stable.no_verdict) == (3, 1, 0, 2)
    assert [s.met[STABLE] for s in stats.samples] == [None, True, None]
    assert [w.why for w in stats.worst if w.verdict == "inconclusive"] == ["nyquist-data: Z = N + P < 0", "a self-check failed"]


def test_a_failed_sample_without_a_gain_crossover_is_worse_than_one_with_a_margin():
    """Among failed samples, one without any phase margin (no gain crossover) comes first, then by phase margin."""
    recs = [record("tt", 1, "fail", 30.0, met=False), record("tt", 2, "fail", None, met=False), record("tt", 3, "fail", 20.0, met=False)]
    assert [w.seed for w in summarise(recs, ["pm >= 45"]).worst] == [2, 3, 1]


def test_spreads_over_every_corner_only_when_there_are_several():
    """One corner: one spread a figure, of that corner and node; two corners: each corner's, then every corner's (corner
    empty), each at the node the samples were broken at."""
    one = summarise([record("tt", 1, "pass"), record("tt", 2, "pass", 50.0)], [])
    assert {(s.corner, s.at) for s in one.spreads} == {("tt", "out")} and len(one.spreads) == len({s.figure for s in one.spreads})
    assert [s.at for s in one.samples] == ["out", "out"]
    two = summarise([record("cold", 1, "pass"), record("hot", 1, "pass", 50.0)], [])
    assert [(s.corner, s.at) for s in two.spreads if s.figure == "pm"] == [("cold", "out"), ("hot", "out"), ("", "out")]
    assert next(s for s in two.spreads if s.figure == "pm" and s.corner == "").count == 2


def test_a_record_without_a_break_node_has_an_empty_one():
    """The node a sample was broken at is the record's "at", and empty when the record has none."""
    rec = record("tt", 1, "pass")
    del rec["at"]
    assert summarise([rec], []).samples[0].at == ""


def test_no_records_show_nothing():
    """With no sample the deciding yield has no sample, the interval and bounds are 0 and 1 (the data shows nothing), and
    a target is neither met nor missed: inconclusive."""
    stats = summarise([], ["pm >= 45"], target=0.9)
    y = stats.deciding
    assert (y.requirement, y.corner, y.at, y.samples, y.passed, y.failed, y.no_verdict) == (EVERY, "", "", 0, 0, 0, 0)
    assert (y.interval, y.lower, y.upper, y.estimate) == ((0.0, 1.0), 0.0, 1.0, 0.0)
    assert stats.verdict == "inconclusive" and stats.needed is None and stats.worst == () and stats.spreads == ()


def test_the_part_kept_of_a_record_holds_no_t_inputs_or_ngspice_output():
    """statistics_part keeps what the statistics read and drops T, the inputs --resume compares and ngspice's output."""
    rec = {**record("tt", 1, "pass"), "inputs": {"loop.cir": "abc"}, "simulator_output": "many lines"}
    rec["loop"]["loop_gain"] = {"freq_hz": [1.0], "re": [2.0], "im": [0.0]}
    part = statistics_part(rec)
    assert "inputs" not in part and "simulator_output" not in part and "loop_gain" not in part["loop"]
    assert part["loop"]["margins"] == rec["loop"]["margins"] and repr(summarise([part], ["pm >= 45"])) == repr(summarise([rec], ["pm >= 45"]))


def test_when_every_sample_fails_no_count_shows_the_target_at_the_rate_seen():
    """Every sample failed (a failure rate of 1): the samples a target needs with no failure are still given, and none at
    the rate seen (no number of samples can show it); the seeds are those of the samples, in order."""
    stats = summarise([record("tt", s, "fail", 40.0, met=False) for s in (3, 1, 2)], ["pm >= 45"], target=0.9)
    assert (stats.needed.with_no_failure, stats.needed.at_rate_seen, stats.needed.rate_seen) == (29, None, 1.0)
    assert stats.verdict == "fail" and stats.seeds == (1, 2, 3)


def test_a_target_met_exactly_by_the_lower_bound_passes_and_one_met_exactly_by_the_upper_bound_does_not_fail():
    """The sentence the data supports is "yield >= target at the confidence": true when the lower bound equals the target
    (PASS); FAIL needs the upper bound below the target, so an upper bound equal to it is INCONCLUSIVE. The bounds are
    scipy's exact binomial ones (binomtest), the targets set to netloop's bounds exactly, then to the next float above."""
    from netloop.jobs.statistics.run import SampleRun

    clean = [record("tt", s, "pass") for s in range(1, 60)]
    lower = summarise(clean, ["pm >= 45"]).deciding.lower
    assert lower == pytest.approx(binomtest(59, 59, alternative="greater").proportion_ci(0.95, "exact").low, abs=1e-9)
    at_lower = summarise(clean, ["pm >= 45"], target=lower)
    assert at_lower.verdict == "pass"
    assert summarise(clean, ["pm >= 45"], target=float(np.nextafter(lower, 1.0))).verdict == "inconclusive"
    failing = [record("tt", s, "pass") for s in range(1, 31)] + [record("tt", s, "fail", 40.0, met=False) for s in range(31, 61)]
    upper = summarise(failing, ["pm >= 45"]).deciding.upper
    assert upper == pytest.approx(binomtest(30, 60, alternative="less").proportion_ci(0.95, "exact").high, abs=1e-9)
    assert summarise(failing, ["pm >= 45"], target=upper).verdict == "inconclusive"
    assert summarise(failing, ["pm >= 45"], target=float(np.nextafter(upper, 1.0))).verdict == "fail"
    # a run passes when its statistics do
    for stats in (at_lower, summarise(failing, ["pm >= 45"], target=0.9)):
        run = SampleRun(plan=None, run=None, statistics=stats)
        assert (run.verdict, run.passed) == (stats.verdict, stats.verdict == "pass")


def test_a_sample_is_conclusive_when_it_passed_or_failed_on_data_that_checked_itself():
    """A sample's verdict supports the statistics when it is pass or fail; inconclusive (a self-check failed) and error
    (not measured) samples do not."""
    from netloop.jobs.statistics.summary import outcome

    verdicts = {o: outcome(record("tt", 1, o, met=o != "fail")).conclusive for o in ("pass", "fail", "inconclusive", "error")}
    assert verdicts == {"pass": True, "fail": True, "inconclusive": False, "error": False}


def test_a_figure_listed_as_minus_infinity_reads_as_minus_infinity():
    """A figure the loop document leaves null and lists under "infinite" as "-inf" reads as -inf, as "+inf" reads as +inf
    (netloop.jobs.document: JSON has no infinity)."""
    rec = record("tt", 1, "pass", gm=None)
    rec["loop"]["infinite"] = {"margins.gain_margin_db": "-inf", "peaking.peak_db": "+inf"}
    rec["loop"]["peaking"]["peak_db"] = None
    figures = summarise([rec], []).samples[0].figures
    assert figures["gm"] == -np.inf and figures["peak"] == np.inf


def test_a_sample_failing_two_requirements_names_both():
    """The why of a sample that fails two requirements names both, in the plan's order, separated by a comma."""
    rec = record("tt", 1, "fail", met=False)
    rec["loop"]["requirements"].append({"text": "gm >= 10", "passed": False})
    assert summarise([rec], ["pm >= 45", "gm >= 10"]).samples[0].why == "pm >= 45, gm >= 10"


def test_yields_at_two_break_nodes_name_their_node_and_the_dies_none():
    """With samples broken at two nodes, each node's yields name it, and the dies' yield over every corner and node
    names no corner and no node (empty strings, as the document has them)."""
    recs = []
    for seed in (1, 2):
        for at in ("out", "fb"):
            rec = record("tt", seed, "pass")
            rec["at"] = at
            recs.append(rec)
    stats = summarise(recs, ["pm >= 45"])
    assert {y.at for y in stats.yields if y.corner} == {"out", "fb"}
    assert (stats.deciding.corner, stats.deciding.at) == ("", "")
    assert all(y.at == "" for y in stats.yields if not y.corner)
