"""Monte Carlo samples for real: ngspice draws each sample's agauss values from its seed, the margins follow the
distribution the closed form gives them, the yield bounds cover the true yield, and a seed reruns bit for bit.

The circuit is an invented behavioural two-pole loop, T(s) = K / ((1 + s/w1)(1 + s/w2)) with K = gm1 R1 gm2 R2 exactly
(ideal controlled sources, R and C), whose first transconductance is written agauss(1e-3, 3e-4, 3). The ngspice
manual ("Statistical circuit analysis", "Using random param(eters)") defines agauss(nom, avar, sigma) as the nominal
value plus a Gaussian variation of standard deviation avar divided by sigma: gm1 ~ N(1e-3, 1e-4), so K ~ N(100, 10).
References: scipy.stats.kstest and scipy.stats.norm (scipy 1.17) for the distributions; the closed form of the
two-pole loop's phase margin (crossover from |T| = 1, a quadratic in wc^2) for the margins.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy.optimize import brentq
from scipy.stats import kstest, norm

from netloop.jobs.corners.runner import local_cluster
from netloop.jobs.statistics import (
    load_sample_plan,
    rerun_sample,
    run_samples,
    summarise,
)

pytestmark = pytest.mark.ngspice

R1, GM2, R2 = 1e5, 1e-3, 1e3
W1, W2 = 2 * math.pi * 1e3, 2 * math.pi * 1e5  # poles at 1 kHz and 100 kHz
MU, SIGMA = 1e-3, 1e-4  # agauss(1e-3, 3e-4, 3): standard deviation 3e-4 / 3 (ngspice manual)
K_MU, K_SIGMA = MU * R1 * GM2 * R2, SIGMA * R1 * GM2 * R2  # 100, 10
REQUIRE = 51.5  # pm >= 51.5: a yield near 70 %
TEXT = f"pm >= {REQUIRE}"
SAMPLES, BLOCK = 240, 20

LOOP = f"""invented two-pole loop: T(s) = K / ((1 + s/w1)(1 + s/w2)), K = gm1 R1 gm2 R2, gm1 drawn by agauss
Vin in 0 dc 0 ac 1
G1 0 n1 in out {{agauss(1e-3, 3e-4, 3)}}
R1 n1 0 {R1!r}
C1 n1 0 {{c1}}
G2 0 n2 n1 0 {GM2!r}
R2 n2 0 {R2!r}
C2 n2 0 {1 / (W2 * R2)!r}
E3 out 0 n2 0 1
.param c1={1 / (W1 * R1)!r}
.end
"""


def pm_of_gain(k: float) -> float:
    """The closed-form phase margin (deg) of the loop with DC gain k: wc^2 is the positive root of
    (1 + a/w1^2)(1 + a/w2^2) = k^2, and PM = 180 - atan(wc/w1) - atan(wc/w2)."""
    qa, qb, qc = 1 / (W1**2 * W2**2), 1 / W1**2 + 1 / W2**2, 1 - k * k
    wc = math.sqrt((-qb + math.sqrt(qb * qb - 4 * qa * qc)) / (2 * qa))
    return 180 - math.degrees(math.atan(wc / W1) + math.atan(wc / W2))


def gain_of_pm(pm: float) -> float:
    """The DC gain whose phase margin is ``pm`` (the phase margin falls as the gain rises)."""
    return brentq(lambda k: pm_of_gain(k) - pm, 1.0001, 1e5, xtol=1e-12, rtol=1e-14)


def pm_cdf(pm: np.ndarray, k_sigma: float = K_SIGMA) -> np.ndarray:
    """P(PM <= pm) = P(K >= K(pm)) for K ~ N(K_MU, k_sigma)."""
    return np.array([norm.sf(gain_of_pm(p), K_MU, k_sigma) for p in np.atleast_1d(pm)])


def gain_of(record: dict) -> float:
    """K of one sample from its measured T: T(jw) (1 + jw/w1)(1 + jw/w2) at the lowest frequency swept."""
    t = record["loop"]["loop_gain"]
    w = 2 * math.pi * t["freq_hz"][0]
    k = complex(t["re"][0], t["im"][0]) * (1 + 1j * w / W1) * (1 + 1j * w / W2)
    assert abs(k.imag) < 1e-6 * abs(k)  # T is the two-pole form: what is left is real
    return k.real


@pytest.fixture(scope="module")
def scheduler():
    """A local Dask cluster of two worker processes, as `netloop yield --workers 2` starts it."""
    with local_cluster(2) as cluster:
        yield cluster.scheduler_address


@pytest.fixture(scope="module")
def sampled(tmp_path_factory, scheduler):
    """SAMPLES samples of the loop (seeds 1 to SAMPLES), measured once for the module."""
    folder = tmp_path_factory.mktemp("loop")
    (folder / "loop.cir").write_text(LOOP)
    (folder / "plan.toml").write_text(f'netlist = "loop.cir"\nat = "out"\nrequire = ["{TEXT}"]\n[samples]\ncount = {SAMPLES}\n')
    plan = load_sample_plan(folder / "plan.toml")
    run = run_samples(plan, cluster=scheduler)
    return plan, run, run.whole_records()


def test_sampled_gain_follows_the_declared_distribution(sampled):
    """The gm1 each sample measured (from its T) is N(1e-3, 1e-4) by a KS test; the other reading of agauss's
    third argument (standard deviation avar itself, 3e-4) is rejected by the same test."""
    _, _, records = sampled
    gm1 = np.array([gain_of(r) for r in records]) / (R1 * GM2 * R2)
    assert len(set(gm1.tolist())) == SAMPLES  # every seed drew its own value
    assert kstest(gm1, norm(MU, SIGMA).cdf).pvalue > 0.01
    assert kstest(gm1, norm(MU, 3 * SIGMA).cdf).pvalue < 1e-6


def test_phase_margin_follows_the_transformed_gain_distribution(sampled):
    """The measured phase margins agree with each sample's closed form to 1e-6 deg, and their empirical distribution
    is the analytic one, P(PM <= p) = P(K >= K(p)), by a KS test (a spread three times as wide is rejected)."""
    _, _, records = sampled
    pm = np.array([r["loop"]["margins"]["phase_margin_deg"] for r in records])
    closed = np.array([pm_of_gain(gain_of(r)) for r in records])
    assert np.max(np.abs(pm - closed)) < 1e-6
    assert kstest(pm, pm_cdf).pvalue > 0.01
    assert kstest(pm, lambda p: pm_cdf(p, 3 * K_SIGMA)).pvalue < 1e-6


def test_yield_intervals_cover_the_analytic_yield_over_repeated_seeds(sampled):
    """The true yield of pm >= 51.5, P(K <= K(51.5)), lies in the 95 % Clopper-Pearson interval of at least 11 of the 12
    blocks of 20 seeds (each covers with probability >= 95 %), and of the whole run, whose yield estimate counts the
    samples whose closed-form margin meets the requirement."""
    _, run, records = sampled
    truth = norm.cdf(gain_of_pm(REQUIRE), K_MU, K_SIGMA)
    assert 0.6 < truth < 0.8  # a yield the bounds can miss on either side
    covered = 0
    for start in range(0, SAMPLES, BLOCK):
        stats = summarise(run.run.records[start:start + BLOCK], [TEXT], confidence=0.95)
        low, high = stats.yields_of(TEXT)[0].interval
        covered += low <= truth <= high
    assert covered >= 11
    whole = run.statistics.yields_of(TEXT)[0]
    assert whole.samples == SAMPLES and whole.interval[0] <= truth <= whole.interval[1] and whole.lower <= truth
    assert whole.estimate == sum(pm_of_gain(gain_of(r)) >= REQUIRE for r in records) / SAMPLES


def test_the_run_keeps_what_its_statistics_read(sampled):
    """The records a run keeps in memory (statistics_part: no T, a third of a record) give the same statistics, figure
    for figure, as the whole records read back from the results file (SampleRun.whole_records), which hold T."""
    plan, run, records = sampled
    assert all("loop_gain" not in r["loop"] for r in run.run.records) and all("loop_gain" in r["loop"] for r in records)
    assert [r["corner"] for r in records] == [r["corner"] for r in run.run.records]
    texts = [r.text for r in plan.plan.requirements]
    assert repr(summarise(records, texts)) == repr(run.statistics) == repr(summarise(run.run.records, texts))


def test_a_run_reads_its_target_and_confidence_from_the_plan_and_runs_on_the_cluster_given(tmp_path, scheduler):
    """A plan's target and confidence decide its statistics' verdict when the call gives none (the README's plan sets
    both), the records kept in memory are statistics_part's (no T), and the samples run on the workers of the cluster
    given, not on a cluster of the run's own."""
    from distributed import Client

    (tmp_path / "loop.cir").write_text(LOOP)
    (tmp_path / "plan.toml").write_text(f'netlist = "loop.cir"\nat = "out"\nrequire = ["{TEXT}"]\n'
                                        '[samples]\ncount = 4\ntarget = "10%"\nconfidence = "80%"\n')
    run = run_samples(load_sample_plan(tmp_path / "plan.toml"), cluster=scheduler, out=tmp_path / "r.jsonl")
    assert (run.statistics.target, run.statistics.confidence) == (0.1, 0.8)
    assert run.statistics.deciding.confidence == 0.8
    assert all("loop_gain" not in r["loop"] for r in run.run.records)
    with Client(scheduler) as client:
        workers = {f"{host}:{pid}" for host, pid in client.run(lambda: (__import__("socket").gethostname(), __import__("os").getpid())).values()}
    assert {r["worker"] for r in run.run.records} <= workers


def test_a_sample_of_a_plan_that_finds_its_loops_reruns_alone_bit_for_bit(tmp_path, scheduler):
    """With at = "auto" (the loops found in the netlist) a sample reruns alone as its worker measured it: the same T."""
    (tmp_path / "loop.cir").write_text(LOOP)
    (tmp_path / "plan.toml").write_text('netlist = "loop.cir"\nat = "auto"\n[samples]\ncount = 2\n')
    plan = load_sample_plan(tmp_path / "plan.toml")
    record = next(r for r in run_samples(plan, cluster=scheduler, out=tmp_path / "r.jsonl").whole_records() if r["corner"] == "nominal#2")
    (again,) = rerun_sample(plan, "nominal#2")
    assert json.loads(json.dumps(_document(again)))["loop_gain"] == record["loop"]["loop_gain"]


def test_a_sample_reruns_alone_bit_for_bit_and_another_seed_differs(sampled):
    """rerun_sample gives the very T and margins the results file holds for that seed (a fresh ngspice, not the
    worker's), and the next seed's T differs."""
    plan, _, records = sampled
    record = next(r for r in records if r["corner"] == "nominal#7")
    assert record["settings"]["seed"] == "7"
    again = json.loads(json.dumps(_document(rerun_sample(plan, "nominal#7")[0])))
    assert again["loop_gain"] == record["loop"]["loop_gain"] and again["margins"] == record["loop"]["margins"]
    other = next(r for r in records if r["corner"] == "nominal#8")
    assert other["loop"]["loop_gain"]["re"] != record["loop"]["loop_gain"]["re"]


def _document(result) -> dict:
    from netloop.jobs.document import to_document

    return to_document(result)


def test_samples_crossed_with_corners_are_the_same_die_at_each(tmp_path, scheduler):
    """Four samples at two values of .param c1, changed in place on each sample's loaded circuit: sample i has the same
    gm1 at both corners (one die), and each record's T is bit for bit that of the sample rerun alone on a fresh load."""
    (tmp_path / "loop.cir").write_text(LOOP)
    (tmp_path / "plan.toml").write_text('netlist = "loop.cir"\nat = "out"\n[axes]\nparam.c1 = ["1.59e-9", "3.18e-9"]\n'
                                        "[samples]\ncount = 4\nfirst_seed = 500\n")
    plan = load_sample_plan(tmp_path / "plan.toml")
    records = run_samples(plan, cluster=scheduler).whole_records()
    assert sorted(r["loads"] for r in records) == [0] * 4 + [1] * 4  # one load per seed, the other corner in place
    by_corner = {}
    for r in records:
        corner, seed = r["corner"].rpartition("#")[0], int(r["settings"]["seed"])
        w1 = 1 / (R1 * float(r["settings"]["param.c1"]))
        t = r["loop"]["loop_gain"]
        w = 2 * math.pi * t["freq_hz"][0]
        by_corner.setdefault(corner, {})[seed] = (complex(t["re"][0], t["im"][0]) * (1 + 1j * w / w1) * (1 + 1j * w / W2)).real
    first, second = by_corner.values()
    assert sorted(first) == [500, 501, 502, 503] and all(first[s] == pytest.approx(second[s], rel=1e-9) for s in first)
    assert len({round(v, 6) for v in first.values()}) == 4
    for r in records[::3]:
        again = _document(rerun_sample(plan, r["corner"])[0])
        assert again["loop_gain"] == r["loop"]["loop_gain"]


def test_a_lost_chunk_of_samples_is_recorded_sample_by_sample(tmp_path, scheduler, monkeypatch):
    """Samples go to the workers in chunks (SAMPLE_CHUNK, netloop.jobs.corners.runner.chunk_size): when a chunk's worker
    fails outright, each of its samples gets the record a lost corner gets (an "error" naming the worker's failure, no
    loop), written to the results file, and every other sample is measured, its T still its own seed's (each pass
    record's gm1 differs, and its seed reruns bit for bit)."""
    from netloop.jobs.corners import read_records, runner

    measure_chunk = runner.run_chunk

    def lost(tasks, options, netlists=None, run=None):  # run_chunk's own signature
        if any(t.corner.name == "nominal#5" for t in tasks):
            raise RuntimeError("worker lost")
        return measure_chunk(tasks, options, netlists, run)

    monkeypatch.setattr(runner, "run_chunk", lost)
    (tmp_path / "loop.cir").write_text(LOOP)
    (tmp_path / "plan.toml").write_text('netlist = "loop.cir"\nat = "out"\n[samples]\ncount = 16\n')
    plan = load_sample_plan(tmp_path / "plan.toml")
    run = run_samples(plan, cluster=scheduler, out=tmp_path / "r.jsonl")
    assert runner.chunk_size(16 // 2, 4) == 2  # 8 samples a worker: chunks of two
    records = run.whole_records()
    errors = [r for r in records if r["outcome"] == "error"]
    assert len(errors) == 2 and "nominal#5" in {r["corner"] for r in errors}
    assert all("the worker failed: RuntimeError('worker lost')" in r["error"] and r["loop"] is None for r in errors)
    measured = [r for r in records if r["outcome"] != "error"]
    assert len(measured) == 14 and len({gain_of(r) for r in measured}) == 14
    written, _ = read_records(tmp_path / "r.jsonl")
    assert sorted(r["corner"] for r in written if r.get("record") == "corner") == sorted(f"nominal#{i}" for i in range(1, 17))
    again = _document(rerun_sample(plan, measured[-1]["corner"])[0])
    assert again["loop_gain"] == measured[-1]["loop"]["loop_gain"]
