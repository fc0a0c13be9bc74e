"""The statistics a designer signs off with, from a statistical run's records: yields with Clopper-Pearson bounds,
the spread of the margins, the worst samples, and the samples a yield target needs.

How a sample enters a yield. Each sample at each corner (and break node) is one of:

    passed      measured, every self-check passed, and it meets the requirement
    failed      measured, every self-check passed, and it does not (an unstable loop fails every requirement)
    no verdict  measured but a self-check failed (inconclusive), or not measured at all (error)

A sample with no verdict is never counted as passing. The yield estimate and the lower bound count it
as failing (the yield shown is the yield the data proves); the upper bound counts it as passing (the
yield the data cannot rule out). So the bounds stay honest in both directions, and a verdict of FAIL
against a target needs failures that were measured.

The spread (mean, standard deviation, minimum, maximum) of each figure is over the samples with a
verdict; a sample without the figure (no gain crossover, no phase crossover) is counted apart.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field

from netloop.jobs.statistics.bounds import (
    interval,
    lower_bound,
    samples_needed,
    upper_bound,
)
from netloop.jobs.statistics.samples import sample_of

__all__ = [
    "EVERY",
    "FIGURES",
    "STABLE",
    "STATISTICAL_CAUTION",
    "Needed",
    "SampleOutcome",
    "Spread",
    "Yield",
    "YieldStatistics",
    "statistics_part",
    "summarise",
]

FIGURES: dict[str, tuple[str, str, str]] = {
    "pm": ("phase margin", "deg", "margins.phase_margin_deg"),
    "gm": ("gain margin", "dB", "margins.gain_margin_db"),
    "fc": ("crossover frequency", "Hz", "margins.unity_gain_hz"),
    "peak": ("closed-loop peaking", "dB", "peaking.peak_db"),
}
"""The figures whose spread is reported: key -> (name, unit, dotted path in the loop document)."""

STATISTICAL_CAUTION = (
    "The statistical models are the foundry's: this yield is only as good as they are. It is the small-signal "
    "stability yield around each sample's operating point only; small-signal margins do not prove large-signal "
    "stability (slewing, start-up, limit cycles, supply and load steps), and sign-off follows your team's own "
    "verification flow and the foundry's guidance."
)
STABLE = "stable"  # the yield of stability alone (the Nyquist count)
EVERY = "every requirement"  # the yield of the samples' own verdict: stable and every requirement met
WORST = 8  # worst samples listed


@dataclass(frozen=True, slots=True)
class SampleOutcome:
    """One sample measured at one corner and break node, as its record says."""

    name: str  # "27C#17"
    corner: str  # "27C"
    at: str
    seed: int
    verdict: str  # "pass" | "fail" | "inconclusive" | "error" (the record's outcome)
    met: Mapping[str, bool | None]  # requirement text (and STABLE, EVERY) -> met; None: no verdict
    figures: Mapping[str, float | None]  # FIGURES key -> value; None: the loop has none; +inf: infinite (gm)
    why: str = ""  # for a sample that is not a plain pass: the failed requirements, the failed check, the error

    @property
    def conclusive(self) -> bool:
        """Measured, and every self-check passed."""
        return self.verdict in ("pass", "fail")


@dataclass(frozen=True, slots=True)
class Yield:
    """The yield of one requirement (or STABLE, or EVERY) over the samples of one corner and break node, or of the
    dies over every corner and node (``corner`` and ``at`` empty: a die passes when it passes at each)."""

    requirement: str
    corner: str
    at: str
    samples: int
    passed: int
    failed: int
    no_verdict: int
    confidence: float
    interval: tuple[float, float]  # two-sided Clopper-Pearson at ``confidence``, no-verdict samples counted as failing
    lower: float  # one-sided lower bound at ``confidence``, no-verdict samples counted as failing
    upper: float  # one-sided upper bound at ``confidence``, no-verdict samples counted as passing

    @property
    def estimate(self) -> float:
        """passed / samples: no-verdict samples count against it."""
        return self.passed / self.samples if self.samples else 0.0


@dataclass(frozen=True, slots=True)
class Spread:
    """Mean, standard deviation (n - 1), minimum and maximum of one figure over the samples with a verdict of one
    corner and break node (``corner`` empty: every corner)."""

    figure: str  # a FIGURES key
    corner: str
    at: str
    count: int  # samples with a value
    mean: float | None
    std: float | None  # None with fewer than two values
    min: float | None
    max: float | None
    infinite: int = 0  # samples where the figure is infinite (a gain margin without phase crossover)
    missing: int = 0  # samples without the figure (no crossover)
    without_verdict: int = 0  # samples left out: no verdict


@dataclass(frozen=True, slots=True)
class Needed:
    """How many samples show the target yield at the confidence: with no failure at all, and at the failure rate
    seen so far (None when that rate makes the target unreachable)."""

    target: float
    confidence: float
    with_no_failure: int
    at_rate_seen: int | None
    rate_seen: float  # (failed + no verdict) / samples of the yield that decides the verdict


@dataclass(frozen=True, slots=True)
class YieldStatistics:
    """What a statistical run shows: every sample's outcome, the yields, the spreads, the worst samples, the verdict."""

    samples: tuple[SampleOutcome, ...]
    corners: tuple[str, ...]  # in plan order
    nodes: tuple[str, ...]
    requirements: tuple[str, ...]  # the plan's requirement texts
    yields: tuple[Yield, ...]  # per requirement (then STABLE, EVERY): each corner and node, then every die
    spreads: tuple[Spread, ...]
    worst: tuple[SampleOutcome, ...]  # no verdict and failed first, then the lowest phase margins
    deciding: Yield  # EVERY over every corner and node: the yield the verdict is about
    confidence: float
    target: float | None = None
    needed: Needed | None = None
    seeds: tuple[int, ...] = field(default=())  # every seed seen, ascending

    @property
    def verdict(self) -> str:
        """With a target: "pass" when the lower bound reaches it, "fail" when even the upper bound (no-verdict samples
        counted as passing) stays below it, else "inconclusive" (more samples needed). Without a target, as a corner
        run: "fail" when any sample failed or was not measured, else "inconclusive" when any has no verdict, else
        "pass"."""
        if self.target is not None:
            if self.deciding.samples and self.deciding.lower >= self.target:
                return "pass"
            if self.deciding.samples and self.deciding.upper < self.target:
                return "fail"
            return "inconclusive"
        verdicts = {s.verdict for s in self.samples}
        if not verdicts or verdicts & {"fail", "error"}:
            return "fail"
        return "inconclusive" if "inconclusive" in verdicts else "pass"

    def yields_of(self, requirement: str) -> tuple[Yield, ...]:
        """The yields of one requirement (or STABLE, EVERY), each corner and node, then every die."""
        return tuple(y for y in self.yields if y.requirement == requirement)


def _value(loop: Mapping, path: str) -> float | None:
    """The figure at a dotted path of a loop document: None when it does not exist, +-inf where ``infinite`` says so."""
    node: object = loop
    for part in path.split("."):
        node = node.get(part) if isinstance(node, Mapping) else None
    if node is None:
        sign = (loop.get("infinite") or {}).get(path)
        return {"+inf": math.inf, "-inf": -math.inf}.get(sign)
    return float(node)


# what of a loop document outcome() reads: the requirements met, the Nyquist verdict, the self-checks, the figures
_READ = ("requirements", "stability", "checks", "infinite", *sorted({path.split(".")[0] for _, _, path in FIGURES.values()}))


def statistics_part(record: Mapping) -> dict:
    """What of a sample's record the statistics read (outcome): everything but T, the rest of the loop document and the
    input fingerprints, about a third of the record in memory. A statistical run keeps only this of each record; the
    results file has them whole (SampleRun.whole_records)."""
    loop = record.get("loop")
    part = {k: v for k, v in record.items() if k not in ("loop", "inputs", "simulator_output")}
    part["loop"] = {k: loop[k] for k in _READ if k in loop} if loop else loop
    return part


def outcome(record: Mapping) -> SampleOutcome:
    """A results-file record of one sample as a SampleOutcome."""
    corner, seed = sample_of(dict(record))
    verdict = record["outcome"]
    loop = record.get("loop") or {}
    conclusive = verdict in ("pass", "fail")
    met: dict[str, bool | None] = {}
    for q in loop.get("requirements") or ():
        met[q["text"]] = bool(q["passed"]) if conclusive else None
    stable = (loop.get("stability") or {}).get("stable")
    met[STABLE] = bool(stable) if conclusive else None
    met[EVERY] = (verdict == "pass") if conclusive else None
    figures = {key: _value(loop, path) for key, (_, _, path) in FIGURES.items()} if loop else dict.fromkeys(FIGURES)
    if verdict == "error":
        why = str(record.get("error") or "not measured").splitlines()[0]
    elif verdict == "inconclusive":
        failed = [c for c in loop.get("checks") or () if not c["passed"]]
        why = "; ".join(f"{c['name']}: {c['detail']}" for c in failed) or "a self-check failed"
    elif not stable:
        why = "unstable"
    else:
        why = ", ".join(q["text"] for q in loop.get("requirements") or () if not q["passed"])
    return SampleOutcome(str(record["corner"]), corner, str(record.get("at") or ""), seed if seed is not None else 0, verdict, met,
                         figures, why)


def _yield(requirement: str, corner: str, at: str, met: Sequence[bool | None], confidence: float) -> Yield:
    n = len(met)
    passed = sum(1 for m in met if m is True)
    failed = sum(1 for m in met if m is False)
    unknown = n - passed - failed
    if n == 0:
        return Yield(requirement, corner, at, 0, 0, 0, 0, confidence, (0.0, 1.0), 0.0, 1.0)
    return Yield(requirement, corner, at, n, passed, failed, unknown, confidence, interval(passed, n, confidence),
                 lower_bound(passed, n, confidence), upper_bound(passed + unknown, n, confidence))


def _die(mets: Iterable[bool | None]) -> bool | None:
    """A die over every corner and node: fails when it fails anywhere, passes when it passes everywhere, else no verdict."""
    values = list(mets)
    if any(m is False for m in values):
        return False
    return True if values and all(m is True for m in values) else None


def _spread(figure: str, corner: str, at: str, samples: Sequence[SampleOutcome]) -> Spread:
    judged = [s for s in samples if s.conclusive]
    values = [s.figures.get(figure) for s in judged]
    finite = [v for v in values if v is not None and math.isfinite(v)]
    infinite = sum(1 for v in values if v is not None and not math.isfinite(v))
    missing = sum(1 for v in values if v is None)
    n = len(finite)
    mean = finite[0] + math.fsum(v - finite[0] for v in finite) / n if n else None  # about the first value: equal values give it exactly
    std = math.sqrt(math.fsum((v - mean) ** 2 for v in finite) / (n - 1)) if n > 1 else None
    return Spread(figure, corner, at, n, mean, std, min(finite) if finite else None, max(finite) if finite else None,
                  infinite, missing, len(samples) - len(judged))


def _worst_key(s: SampleOutcome) -> tuple:
    rank = {"error": 0, "inconclusive": 1, "fail": 2, "pass": 3}[s.verdict]
    pm = s.figures.get("pm")
    return (rank, pm if pm is not None else -math.inf, s.seed, s.corner, s.at)


def summarise(records: Iterable[Mapping], requirements: Sequence[str], *, confidence: float = 0.95,
              target: float | None = None) -> YieldStatistics:
    """The statistics of a statistical run's records (one per sample, corner and break node), in the plan's order."""
    samples = tuple(outcome(r) for r in records)
    corners = tuple(dict.fromkeys(s.corner for s in samples))
    nodes = tuple(dict.fromkeys(s.at for s in samples))
    groups = [(c, a) for c in corners for a in nodes if any(s.corner == c and s.at == a for s in samples)]
    seeds = tuple(sorted({s.seed for s in samples}))
    yields = []
    for req in (*requirements, STABLE, EVERY):
        for c, a in groups:
            yields.append(_yield(req, c, a, [s.met.get(req) for s in samples if s.corner == c and s.at == a], confidence))
        if len(groups) > 1:
            by_die: dict[int, list] = {}
            for s in samples:
                by_die.setdefault(s.seed, []).append(s.met.get(req))
            yields.append(_yield(req, "", "", [_die(by_die[seed]) for seed in seeds], confidence))
    deciding = yields[-1] if yields else _yield(EVERY, "", "", [], confidence)  # no record: no sample shows anything
    spreads = [_spread(f, c, a, [s for s in samples if s.corner == c and s.at == a]) for f in FIGURES for c, a in groups]
    if len(corners) > 1:
        spreads += [_spread(f, "", a, [s for s in samples if s.at == a]) for f in FIGURES for a in nodes]
    worst = tuple(sorted(samples, key=_worst_key)[:WORST])
    needed = None
    if target is not None and deciding.samples:
        rate = (deciding.failed + deciding.no_verdict) / deciding.samples
        needed = Needed(target, confidence, samples_needed(target, confidence), samples_needed(target, confidence, rate) if rate < 1 else None, rate)
    return YieldStatistics(samples, corners, nodes, tuple(requirements), tuple(yields), tuple(spreads), worst, deciding,
                           confidence, target, needed, seeds)
