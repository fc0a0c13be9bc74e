"""Both loops of a fully differential circuit, composed once: break a node pair, four runs, DM and CM analysis, coupling.

The pair is broken with netloop.probe.differential (Hurst and Lewis, 1995; the modal quantities
and each mode's Tian formula are derived in that module's docstring). One SimJob holds the four
AC runs (dm-series, dm-shunt, cm-series, cm-shunt) on one shared operating point; the sweep is
widened and refined for both return ratios together (netloop.jobs.measure.sample_loops).

Coupling between the modes (exactly zero for matched halves) is read from the signal returned
around the loop, R = -(V_a1 + I_b2) in the voltage frame (netloop.probe.differential): in the DM
runs the CM part |R_cd| relative to the DM part |R_dd|, and in the CM runs |R_dc| relative to
|R_cc|, each as the maximum in dB over the frequencies up to that mode's highest gain crossover
(the whole sweep when it has none), where the mode's own loop is strong and its margins are set.
Above ``COUPLING_THRESHOLD_DB`` a warning says the modes couple. The -40 dB default is our
choice, common practice for "negligible": the other mode's returned signal is under 1 % of the
mode's own, so its effect on the mode's margins is well under 1 degree.
"""

from __future__ import annotations

import math
import uuid
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, replace
from os import PathLike

import numpy as np

from netloop.analysis import middlebrook, parse_requirements, tian
from netloop.analysis.requirements import Requirement
from netloop.analysis.results import Check, LoopAnalysis
from netloop.errors import NetloopError, ProbeError
from netloop.jobs.loop_result import BreakInfo, LoopResult, SimInfo, Verdict, combined_verdict, netlist_notes, raise_placed
from netloop.jobs.splits import LoopStructure
from netloop.jobs.measure_checks import analysis_doubts, moved, op_sources, pair_placements, poles_agree, second_break_band
from netloop.jobs.measure import (METHODS, Sweep, closed_circuit_pz, ignored_lines, inputs_only_doubt, load_netlist, netlist_folder,
                                  own_simulator, refuse_inputs_only, sample_loops)
from netloop.netlist import Netlist, write_netlist
from netloop.probe.differential import MODES, RUNS, PairProbe, break_pair
from netloop.sim import AcRun, AcSweep, SimJob, SimResult, Simulator

__all__ = ["COUPLING_THRESHOLD_DB", "Coupling", "PairResult", "measure_pair", "pair_job", "parse_pair"]

COUPLING_THRESHOLD_DB = -40.0


@dataclass(frozen=True, slots=True)
class Coupling:
    """How strongly the differential and common modes couple at the break (dB, the worst below each crossover).

    ``dm_to_cm_db``: max of 20 log10 |R_cd / R_dd| (CM returned per DM returned) over f <= ``dm_band_hz``.
    ``cm_to_dm_db``: max of 20 log10 |R_dc / R_cc| (DM returned per CM returned) over f <= ``cm_band_hz``.
    A band is the mode's highest gain crossover, or the top of the sweep when it has none.
    -inf (exact zero) is possible for a perfectly matched circuit.
    """

    dm_to_cm_db: float
    cm_to_dm_db: float
    dm_band_hz: float
    cm_band_hz: float
    threshold_db: float = COUPLING_THRESHOLD_DB
    unjudged: str = ""  # why the figures judge nothing ("" when they do): a mode that measured no loop is no reference

    @property
    def coupled(self) -> bool:
        """True when either direction is above the threshold (never when the figures judge nothing)."""
        return not self.unjudged and max(self.dm_to_cm_db, self.cm_to_dm_db) > self.threshold_db


@dataclass(frozen=True, slots=True)
class PairResult:
    """Both loops of a node pair, each a LoopResult of the single-ended shape, and their coupling."""

    differential: LoopResult
    common: LoopResult
    coupling: Coupling
    nodes: tuple[str, str]

    @property
    def modes(self) -> Mapping[str, LoopResult]:
        """{"differential": ..., "common": ...}."""
        return {"differential": self.differential, "common": self.common}

    @property
    def stable(self) -> bool:
        return self.differential.stable and self.common.stable

    @property
    def passed(self) -> bool:
        """Both modes pass: every self-check passed, stable, and every requirement met in both."""
        return self.verdict == "pass"

    @property
    def verdict(self) -> Verdict:
        """The two modes' verdicts combined (netloop.jobs.loop_result.combined_verdict)."""
        return combined_verdict((self.differential.verdict, self.common.verdict))


def parse_pair(text: str) -> tuple[str, str]:
    """"OUTP,OUTN" -> ("outp", "outn"); a NetloopError for anything but two different names."""
    parts = [p.strip().lower() for p in text.split(",")]
    if len(parts) != 2 or not all(parts):
        raise ProbeError(f"a node pair is written P,N (two node names and one comma), got {text!r}")
    if parts[0] == parts[1]:
        raise ProbeError(f"a node pair needs two different nodes, got {text!r}")
    return parts[0], parts[1]


def pair_job(pair: PairProbe, sweeps: tuple[AcSweep, ...], *, label: str = "", timeout_s: float = 600.0) -> SimJob:
    """The simulator job of a differential probe: four AC runs on one operating point, only the probe vectors saved."""
    return SimJob(
        netlist=write_netlist(pair.netlist),
        runs=tuple(AcRun(name, ac, sweeps) for name, ac in pair.runs),
        save=pair.save,
        excitable=pair.sources,
        label=label,
        timeout_s=timeout_s,
        workdir=netlist_folder(pair.netlist),
        op_voltages=False,  # as probe_job: the first ac's own operating point serves (sample_loops asks for an op when checked)
        circuit_id=uuid.uuid4().hex,  # as probe_job: every round of this measurement runs on one loaded circuit
    )


def _mode_ratio(q, method: str) -> np.ndarray:
    if method == "tian":
        return tian(q.va1, q.vb1, q.ib2)
    return middlebrook(q.va1, q.vb1, q.ia2, q.ib2)


class _CouplingSamples:
    """Collects the two coupling ratios of every evaluation, so that they end on the analysis' frequencies."""

    def __init__(self) -> None:
        self.freq_hz: list[np.ndarray] = []
        self.dm_to_cm: list[np.ndarray] = []
        self.cm_to_dm: list[np.ndarray] = []

    def add(self, f: np.ndarray, dm_to_cm: np.ndarray, cm_to_dm: np.ndarray) -> None:
        self.freq_hz.append(np.asarray(f, dtype=float))
        self.dm_to_cm.append(np.asarray(dm_to_cm, dtype=float))
        self.cm_to_dm.append(np.asarray(cm_to_dm, dtype=float))

    def worst_db(self, which: str, band_hz: float) -> float:
        f = np.concatenate(self.freq_hz)
        r = np.concatenate(getattr(self, which))
        inside = r[f <= band_hz * (1 + 1e-12)]
        worst = float(np.max(inside)) if inside.size else float(np.max(r))
        return 20.0 * math.log10(worst) if worst > 0 else -math.inf


def _band_hz(a: LoopAnalysis) -> float:
    if a.gain_crossovers:
        return max(c.freq_hz for c in a.gain_crossovers)
    return float(a.freq_hz[-1])


def _break_info(pair: PairProbe, mode: str) -> BreakInfo:
    p, n = pair.p, pair.n
    return BreakInfo(
        node=f"{p.node},{n.node} ({mode} mode)",
        side_a=f"{p.side_a},{n.side_a}",
        side_b=f"{p.side_b},{n.side_b}",
        driver_terminals=(*p.driver_terminals, *n.driver_terminals),
        load_terminals=(*p.load_terminals, *n.load_terminals),
        shunt_terminals=(*p.shunt_terminals, *n.shunt_terminals),
        decided_by=f"{p.node}: {p.decided_by} {n.node}: {n.decided_by}",
        silenced_sources=tuple(dict.fromkeys((*p.silenced_sources, *n.silenced_sources))),
        copied_subcircuits=pair.copied_subcircuits,
        load_readers=(*p.load_readers, *n.load_readers),
    )


def _rhp(value: int | None | Mapping[str, int]) -> dict[str, int | None]:
    """P for each mode: the caller's count, or None (read from the data) for a mode not given."""
    if isinstance(value, Mapping):
        unknown = set(value) - set(MODES)
        if unknown:
            raise NetloopError(f"open_loop_rhp_poles names unknown modes {', '.join(sorted(unknown))}; expected {', '.join(MODES)}")
        return {m: None if value.get(m) is None else int(value[m]) for m in MODES}
    return dict.fromkeys(MODES, None if value is None else int(value))


@dataclass(frozen=True, slots=True)
class _Sampled:
    """One pair break, simulated and analysed."""

    probe: PairProbe
    analyses: dict[str, LoopAnalysis]
    info: SimInfo
    warnings: dict[str, tuple[str, ...]]
    samples: _CouplingSamples
    placements: tuple[Mapping[str, str] | None, Mapping[str, str] | None] = (None, None)  # each node's bridges moved (None: the rules')

    @property
    def doubts(self) -> str:
        return "; ".join(f"{mode} mode: {why}" for mode in MODES if (why := analysis_doubts(self.analyses[mode])))


def _sample_pair(parsed: Netlist, nodes: tuple[str, str], drivers, placements, *, method: str, sweep: Sweep, simulator: Simulator,
                 rhp: dict[str, int | None], label: str, timeout_s: float) -> _Sampled:
    probe = break_pair(parsed, *nodes, drivers=drivers, placements=placements)
    samples = _CouplingSamples()

    def ratios(result: SimResult) -> dict[str, np.ndarray]:
        q = probe.quantities({r.name: dict(r.vectors) for r in result.runs})
        samples.add(result.runs[0].freq_hz, q.dm_to_cm, q.cm_to_dm)
        return {"differential": _mode_ratio(q.differential, method), "common": _mode_ratio(q.common, method)}

    sources = op_sources(parsed)
    base = pair_job(probe, (), label=label, timeout_s=timeout_s)  # written once: every round shares its circuit_id

    def job_for(sweeps: tuple[AcSweep, ...]) -> SimJob:
        return replace(base, runs=tuple(replace(run, sweeps=sweeps) for run in base.runs))

    analyses, info, sim_warnings = sample_loops(job_for, ratios, simulator, sweep, rhp, sources=sources)
    return _Sampled(probe, analyses, info, sim_warnings, samples, placements)


def _settled(first: _Sampled, again) -> tuple[_Sampled, tuple[Check, ...]]:
    """The pair's split settled as a single node's is (netloop.jobs.measure_checks): when a mode fails its checks or has
    poles of its own, the other placements of the bridging elements (the halves alike) are tried on a coarse sweep."""
    why = first.doubts
    if not why or not (first.probe.p.bridges or first.probe.n.bridges):
        return first, ()
    tried = []
    for place in pair_placements(first.probe.p, first.probe.n):
        try:
            trial = again(place, True)
        except ProbeError:
            continue
        tried.append((place, trial))
        if not trial.doubts:
            done = again(place, False)
            what = "; ".join(f"{node}: {moved(pl)}" for node, pl in zip(first.probe.nodes, place) if pl)
            return done, (Check("split", True, f"moved {what}: with the rules' placement, {why}; with this one both modes pass "
                                f"every self-check and T has no right-half-plane pole"),)
    listing = "; ".join(f"{'; '.join(f'{node}: {moved(pl)}' for node, pl in zip(first.probe.nodes, place) if pl)}: {t.doubts}"
                        for place, t in tried) or "no other placement could be built"
    failed = any(not c.passed for a in first.analyses.values() for c in a.checks)
    return first, (Check("split", not failed, f"{'no placement of the bridging elements passes the self-checks' if failed else 'kept the rules placement'}"
                         f": as placed, {why}; tried {listing}",
                         "name each node's driver side with --driver NODE=ELEMENT[.PIN],..., or break the pair at other nodes" if failed else ""),)


def _second_break(first: _Sampled, again) -> Check | None:
    """The check "second-break" at a pair whose rules could not place a bridge (as close to both stages): the same pair with
    those bridges on the other side, on a coarse sweep; both modes' closed-loop poles must agree (as for a single node)."""
    flip = {"driver": "load", "load": "driver"}
    unsure = tuple({b.element: flip[b.side] for b in half.bridges if not b.by_rule and not b.given} for half in (first.probe.p, first.probe.n))
    if not any(unsure):
        return None
    try:
        other = again(unsure, True)
    except ProbeError:
        return None
    hows, agree = [], True
    for mode in MODES:
        ok, how = poles_agree(first.analyses[mode], other.analyses[mode], second_break_band(first.analyses[mode]))
        agree = agree and ok
        hows.append(f"{mode} mode: {how}")
    what = "; ".join(f"{node}: {moved(pl)}" for node, pl in zip(first.probe.nodes, unsure) if pl)
    detail = f"a second break, {what}: {'; '.join(hows)}"
    if agree:
        return Check("second-break", True, detail)
    return Check("second-break", False, detail + "; two exact breaks of one circuit must find the same closed-loop poles",
                 "sample more densely (raise --ppd), or break the pair at other nodes and compare")


def _refuse_inputs_only(sampled: _Sampled, drivers: tuple[str | None, str | None], checks: tuple[Check, ...]) -> None:
    """A node's driver naming only inputs stands when at least one mode's T passes every check and regulates with negative
    feedback (as driver= at one node); else the split is backwards, and the error names the outputs on that node."""
    halves = [(half, d) for half, d in zip((sampled.probe.p, sampled.probe.n), drivers) if d is not None and half.inputs_only]
    if not halves:
        return
    whys = [why for mode in MODES if (why := inputs_only_doubt(sampled.analyses[mode], checks))]
    if len(whys) == len(MODES):
        half, driver = halves[0]
        refuse_inputs_only(half, driver, "; ".join(f"{mode} mode: {why}" for mode, why in zip(MODES, whys)))


class _Structure:
    """The loops through each node of the pair (netloop.jobs.splits.LoopStructure), worked out only when asked."""

    def __init__(self, parsed: Netlist):
        self.parsed = parsed
        self.known: dict[str, LoopStructure] = {}

    def of(self, node: str) -> LoopStructure:
        if node not in self.known:
            self.known[node] = LoopStructure(self.parsed, node)
        return self.known[node]


def _deeper(first: _Sampled, structure: _Structure, again) -> tuple[_Sampled, tuple[Check, ...]]:
    """The pair under the nets' names inside the block that drives them, as a single node's split is tried there when
    doubted: when the pair as named is doubted, or one mode does not regulate while the other does (a net named above the
    block that drives it keeps that block's own loop closed on the driver side), and there every mode passes its checks
    and no fewer modes regulate. Else ``first`` unchanged."""
    lagging = [m for m in MODES if not first.analyses[m].regulates]
    why = first.doubts or ("; ".join(f"the {m} mode does not regulate (|T| at most {first.analyses[m].largest_gain_db:.4g} dB)" for m in lagging)
                           if 0 < len(lagging) < len(MODES) else "")
    if not why:
        return first, ()
    nodes = first.probe.nodes
    aliases = tuple(structure.of(node).alias(node) or node for node in nodes)
    if aliases == nodes:
        return first, ()
    try:
        trial = again((None, None), False, aliases)
    except ProbeError:
        return first, ()
    if trial.doubts or sum(a.regulates for a in trial.analyses.values()) < sum(a.regulates for a in first.analyses.values()):
        return first, ()
    return trial, (Check("split", True, f"broke the pair under the names the nets have inside the block that drives them ({','.join(aliases)}): "
                         f"at {','.join(nodes)}, {why}; here every self-check passes in both modes"),)


def _opens(sampled: _Sampled, mode: str, structure: _Structure) -> tuple[Check, ...]:
    """The check "opens-loop" for a mode whose T does not regulate, as for a single node: the pair's split as measured (its
    bridges where they were moved) must open a loop through at least one of its nodes; a split that opens none measures no
    loop, and its "does not regulate" is no promise."""
    if sampled.analyses[mode].regulates:
        return ()
    found = [c for node, place in zip(sampled.probe.nodes, sampled.placements)
             if (c := structure.of(node).opens_check(node, place or None)) is not None]
    if not found:
        return ()
    if any(c.passed for c in found):
        return (Check("opens-loop", True, "; ".join(c.detail for c in found if c.passed)),)
    return (Check("opens-loop", False, "; ".join(c.detail for c in found), found[0].advice),)


def _told(probe: PairProbe, checks: tuple[Check, ...]) -> PairProbe:
    """The probe whose halves' decided_by also say what the pair's checks moved (the job check "split" when it moved)."""
    moves = [c.detail for c in checks if c.name == "split" and c.passed and not c.detail.startswith("kept ")]
    if not moves:
        return probe
    return replace(probe, n=replace(probe.n, decided_by=f"{probe.n.decided_by[:-1]}; netloop {moves[0]}."))


def _unjudged(analyses: Mapping[str, LoopAnalysis]) -> str:
    """Why the coupling figures judge nothing, or "": a mode whose T is negligible everywhere (its check loop-present
    failed) returns no signal, and a ratio to it says nothing about mismatched halves."""
    dead = [m for m in MODES if any(c.name == "loop-present" and not c.passed for c in analyses[m].checks)]
    if not dead:
        return ""
    return (f"the {' and the '.join(dead)} mode{'s' if len(dead) > 1 else ''} measured no loop (|T| negligible everywhere), "
            "so the signal returned there is no reference for a coupling")


def _elsewhere(mode: str, analyses: Mapping[str, LoopAnalysis], nodes: tuple[str, str]) -> tuple[str, ...]:
    """A warning for a mode that does not regulate at the pair while the other mode does: its loop closes elsewhere."""
    other = next(m for m in MODES if m != mode)
    a = analyses[mode]
    if a.regulates or not analyses[other].regulates:
        return ()
    peak = a.largest_gain_db
    return (f"the {mode}-mode loop hardly passes {nodes[0]},{nodes[1]} (|T| at most {peak:.4g} dB there, while the {other}-mode loop "
            f"regulates): measure it where it closes (netloop loops NETLIST lists the candidates), or at a pair both loops pass",)


def measure_pair(
    netlist: Netlist | str | PathLike[str],
    pair: str | tuple[str, str],
    *,
    drivers: tuple[str | None, str | None] = (None, None),
    method: str = "tian",
    sweep: Sweep = Sweep(),
    open_loop_rhp_poles: int | None | Mapping[str, int] = None,
    requirements: Iterable[str | Requirement] = (),
    simulator: Simulator | None = None,
    keep_decks: str | PathLike[str] | None = None,
    label: str = "",
    timeout_s: float = 600.0,
    coupling_threshold_db: float = COUPLING_THRESHOLD_DB,
    processes: int | None = None,
) -> PairResult:
    """Break the node pair ``pair`` ("outp,outn" or a tuple) and measure its differential- and common-mode loops.

    Takes the arguments of ``measure`` (``requirements`` apply to both modes;
    ``open_loop_rhp_poles`` is one count for both or a mapping by mode name, read from the data
    when not given) and returns a PairResult whose two LoopResults have the single-ended shape.
    ``drivers`` = (P's, N's) chooses each node's driver side as ``driver=`` does for one node (None:
    decided). Without them each node is split by the single-node rules (netloop.probe.sides) on the
    netlist as given, and when a mode fails its self-checks or T has poles of its own, the other
    placements of the bridging elements are tried, the halves alike (the job check "split" says
    what was moved and why); a pair named above the block that drives it is tried under its names
    inside that block when doubted or when one mode does not regulate (docs/splitting.md).
    """
    if method not in METHODS:
        raise NetloopError(f"unknown method {method!r}; expected one of {', '.join(METHODS)}")
    p_node, n_node = parse_pair(pair) if isinstance(pair, str) else parse_pair(",".join(pair))
    rhp = _rhp(open_loop_rhp_poles)
    parsed = load_netlist(netlist)
    reqs = parse_requirements(requirements)
    own = simulator is None
    sim = own_simulator(processes, parsed, len(RUNS), keep_decks) if own else simulator
    options = dict(method=method, simulator=sim, rhp=rhp, label=label, timeout_s=timeout_s)
    try:
        first = _sample_pair(parsed, (p_node, n_node), drivers, (None, None), sweep=sweep, **options)
        job_checks: tuple[Check, ...] = ()
        mode_checks: dict[str, tuple[Check, ...]] = dict.fromkeys(MODES, ())
        if drivers == (None, None):
            extra = []

            def again(place, coarse: bool, nodes: tuple[str, str] = (p_node, n_node)) -> _Sampled:
                done = _sample_pair(parsed, nodes, drivers, place, sweep=replace(sweep, refine=False) if coarse else sweep, **options)
                extra.append((done.info.seconds, done.info.ngspice_seconds))
                return done

            first, job_checks = _settled(first, again)
            if not job_checks and not any(not c.passed for a in first.analyses.values() for c in a.checks):
                second = _second_break(first, again)
                job_checks = (second,) if second is not None else ()
            structure = _Structure(parsed)
            settled, (first, deeper) = first, _deeper(first, structure, again)
            if first is not settled:  # measured again under the deeper names: a failed check of the split it replaced is not
                job_checks = tuple(c for c in job_checks if c.passed)  # this one's (the deeper check says why it was doubted)
            job_checks = (*job_checks, *deeper)
            mode_checks = {mode: _opens(first, mode, structure) for mode in MODES}
            first = replace(first, info=replace(first.info, seconds=first.info.seconds + sum(s for s, _ in extra),
                                                ngspice_seconds=first.info.ngspice_seconds + sum(n for _, n in extra)))
    except NetloopError as exc:
        raise_placed(exc, parsed)  # ngspice's complaint about a card, at that card's file:line
    finally:
        if own and hasattr(sim, "close"):
            sim.close()
    _refuse_inputs_only(first, drivers, job_checks)
    probe, analyses, info, sim_warnings, samples = _told(first.probe, job_checks), first.analyses, first.info, first.warnings, first.samples

    dm_band, cm_band = _band_hz(analyses["differential"]), _band_hz(analyses["common"])
    coupling = Coupling(
        dm_to_cm_db=samples.worst_db("dm_to_cm", dm_band),
        cm_to_dm_db=samples.worst_db("cm_to_dm", cm_band),
        dm_band_hz=dm_band,
        cm_band_hz=cm_band,
        threshold_db=coupling_threshold_db,
        unjudged=_unjudged(analyses),
    )
    coupling_warning = ()
    if coupling.coupled:
        coupling_warning = (
            f"the differential and common modes couple at {p_node},{n_node}: DM->CM {coupling.dm_to_cm_db:.1f} dB, "
            f"CM->DM {coupling.cm_to_dm_db:.1f} dB (threshold {coupling.threshold_db:g} dB); the halves are mismatched, "
            "and each mode's T is measured with the other loop closed",
        )
    results = {}
    for mode in MODES:
        a = analyses[mode]
        pz = closed_circuit_pz(parsed, a, probe.p.side_b)  # as for one node: when T has poles of its own, on a small circuit
        results[mode] = LoopResult(
            netlist=parsed.source,
            label=label,
            method=method,
            breaks=_break_info(probe, mode),
            analysis=a,
            requirements=tuple(r.check(a) for r in reqs),
            ignored_statements=ignored_lines(parsed),
            sim=info,
            checks=(*job_checks, *mode_checks[mode], *((pz,) if pz is not None else ())),
            **netlist_notes(parsed, probe.warnings, coupling_warning, sim_warnings[mode], a.warnings, _elsewhere(mode, analyses, (p_node, n_node))),
        )
    return PairResult(results["differential"], results["common"], coupling, (p_node, n_node))
