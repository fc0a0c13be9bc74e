"""Every loop of a netlist, composed: flatten, find the loop groups, state each break from the probe's real split, take the
census (netloop.jobs.census), measure each group on its own."""

from __future__ import annotations

import logging
from dataclasses import dataclass, replace
from os import PathLike

import numpy as np

from netloop.analysis.results import Check
from netloop.errors import ProbeError
from netloop.graph import FlatCircuit, LoopDiscovery, LoopGroup, find_loops, flatten
from netloop.graph.loops import DEFAULT_LENGTH_BOUND, DEFAULT_MAX_LOOPS
from netloop.graph.mirror import mirror_pairs
from netloop.jobs.census import COARSE_BREAKS, LARGE_COARSE_BREAKS, Census, GroupCensus, choose, coarse_group, why_at
from netloop.jobs.loop_result import LoopResult, Verdict, caveats_on_error, combined_verdict
from netloop.jobs.measure import CLEARS_STATUS, load_netlist, measure, own_simulator
from netloop.jobs.measure_pair import measure_pair
from netloop.jobs.splits import DEFAULT_SPLIT_CHECKS, driver_alias, node_split, probe_splits
from netloop.netlist import Netlist
from netloop.sim import Simulator
from netloop.sim.split import SPLIT_MIN_ELEMENTS

__all__ = [
    "DEFAULT_SPLIT_CHECKS",
    "GroupResult",
    "LoopsCheck",
    "check_loops",
    "discover_loops",
    "driver_alias",
    "measure_all_loops",
    "node_split",
    "opened_circuit_rhp_poles",
    "probe_splits",
    "take_census",
]

_log = logging.getLogger("netloop")  # the status line (netloop.cli.status)


def discover_loops(
    netlist: Netlist | str | PathLike[str], *, length_bound: int = DEFAULT_LENGTH_BOUND, max_loops: int = DEFAULT_MAX_LOOPS,
    split_checks: int = DEFAULT_SPLIT_CHECKS,
) -> LoopDiscovery:
    """The loop groups of a netlist (a parsed Netlist, a path or netlist text), their loops and ranked break nodes.

    The first ``split_checks`` candidates of each group are stated from the probe's real split of the
    node (which loops it opens, which stay closed and why) and re-ranked; 0 keeps the structural view.
    No simulation: take_census adds the coarse sweep and the choice of each group's break.
    """
    parsed = load_netlist(netlist)
    circuit = flatten(parsed)
    _log.info("finding the loops of %d elements", len(circuit))
    found = find_loops(circuit, length_bound=length_bound, max_loops=max_loops)
    found = probe_splits(parsed, circuit, found, checks=split_checks)
    _log.info("loop search done", extra=CLEARS_STATUS)  # a status line is cleared
    return found


def take_census(
    netlist: Netlist | str | PathLike[str], *, sweep: bool = True, simulator: Simulator | None = None, method: str = "tian",
    length_bound: int = DEFAULT_LENGTH_BOUND, max_loops: int = DEFAULT_MAX_LOOPS, split_checks: int = DEFAULT_SPLIT_CHECKS,
    coarse_breaks: int = COARSE_BREAKS, driver: str | None = None, keep_decks: str | PathLike[str] | None = None,
    timeout_s: float = 600.0,
) -> Census:
    """Every loop group with its best candidate breaks measured by one coarse sweep each, and the break chosen for it.

    See netloop.jobs.census. ``sweep=False`` skips the simulation (the choice is then the structural
    ranking's). Without ``simulator`` one ngspice is started for the census and closed after it.
    """
    parsed = load_netlist(netlist)
    circuit = flatten(parsed)
    _log.info("finding the loops of %d elements", len(circuit))
    found = find_loops(circuit, length_bound=length_bound, max_loops=max_loops)
    return _census(parsed, circuit, found, sweep=sweep, simulator=simulator, method=method, split_checks=split_checks,
                   coarse_breaks=coarse_breaks, driver=driver, keep_decks=keep_decks, timeout_s=timeout_s)


def _census(parsed: Netlist, circuit: FlatCircuit, found: LoopDiscovery, *, sweep: bool, simulator: Simulator | None, method: str,
            split_checks: int, coarse_breaks: int, driver: str | None, keep_decks, timeout_s: float) -> Census:
    found = probe_splits(parsed, circuit, found, checks=max(split_checks, 1) if sweep else split_checks, driver=driver)
    own = sweep and simulator is None and bool(found.groups)
    sim = own_simulator(None, parsed, 2, keep_decks) if own else simulator
    if coarse_breaks == COARSE_BREAKS and len(circuit) >= SPLIT_MIN_ELEMENTS:
        coarse_breaks = LARGE_COARSE_BREAKS  # on a large netlist every extra AC run costs a whole operating point
    try:
        groups = []
        for g in found.groups:
            coarse = coarse_group(parsed, g, sim, method=method, breaks=coarse_breaks, timeout_s=timeout_s) if sweep else ()
            gc = choose(g, coarse, swept=sweep)
            pair = _pair_break(gc, mirror_pairs(circuit, _group_nets(gc.group))) if driver is None and gc.chosen else None
            groups.append(replace(gc, pair=pair))
    finally:
        if own and hasattr(sim, "close"):
            sim.close()
    _log.info("loop census done", extra=CLEARS_STATUS)
    discovery = replace(found, groups=tuple(gc.group for gc in groups))
    return Census(parsed.source, discovery, tuple(groups), sweep, found.notes)


def opened_circuit_rhp_poles(result: LoopResult) -> int | None:
    """Right-half-plane poles of the measured T itself (the opened circuit's own instability), or None if unknown.

    Fits T with the same AAA fit the analysis uses for 1/(1+T), by handing it T' = 1/T - 1
    (so that 1/(1+T') = T): the poles it reports are then the poles of T.
    """
    from netloop.analysis.poles import closed_loop_poles

    f, t = result.analysis.freq_hz, result.analysis.t
    with np.errstate(divide="ignore", invalid="ignore"):
        shifted = 1.0 / t - 1.0
    if f.size < 4 or not np.all(np.isfinite(shifted)):
        return None
    fit, _ = closed_loop_poles(f, shifted, 0)
    return None if fit is None else fit.rhp_count


def _closed_note(group: LoopGroup, node: str, left: tuple[int, ...]) -> str:
    shown = "; ".join(f"loop {group.index}.{k}: {group.loops[k - 1].describe(16)}" for k in left[:3])
    more = f" and {len(left) - 3} more" if len(left) > 3 else ""
    return (f"loop {group.index}: breaking {node} leaves {len(left)} of its loops closed ({shown}{more}); "
            "the opened circuit may itself be unstable, so P (its right-half-plane poles) may be nonzero: read the Nyquist count with care")


@dataclass(frozen=True, slots=True)
class GroupResult:
    """One loop group checked without --at: its census, its measured result, or why it has none."""

    census: GroupCensus
    result: LoopResult | None  # None when no break of the group could be measured
    reason: str = ""  # why there is no result (empty when there is one)
    advice: str = ""  # what to try when there is none
    why: str = ""  # why the result's break (its structure and coarse T)
    tried: tuple[str, ...] = ()  # breaks measured or refused before the reported one, each with why it was not kept

    @property
    def label(self) -> str:
        return self.result.label if self.result is not None else self.census.label

    @property
    def verdict(self) -> Verdict:
        """The result's verdict; "inconclusive" when the group could not be measured."""
        return self.result.verdict if self.result is not None else "inconclusive"


@dataclass(frozen=True, slots=True)
class LoopsCheck:
    """Every loop group of a netlist measured on its own (``check`` without --at)."""

    census: Census
    groups: tuple[GroupResult, ...]  # in group order
    notes: tuple[str, ...] = ()

    @property
    def results(self) -> tuple[LoopResult, ...]:
        return tuple(g.result for g in self.groups if g.result is not None)

    @property
    def verdict(self) -> Verdict:
        """Every group's verdict combined (netloop.jobs.loop_result.combined_verdict): an unmeasured group is inconclusive."""
        return combined_verdict(g.verdict for g in self.groups)


_PAIR_OPTIONS = ("method", "sweep", "open_loop_rhp_poles", "requirements", "simulator", "timeout_s")  # measure_pair takes these


def _pair_break(gc: GroupCensus, pairs: tuple[tuple[str, str], ...]) -> tuple[str, str] | None:
    """(the net of the best-ranked usable candidate of the group that has a mirror image, that mirror), or None."""
    mirror = {a: b for a, b in pairs} | {b: a for a, b in pairs}
    return next(((c.node, mirror[c.node]) for c in gc.group.candidates
                 if c.node in mirror and c.split_checked and not c.refused and c.opened), None)


def _measure_as_pair(parsed: Netlist, gc: GroupCensus, options: dict) -> tuple[GroupResult, ...] | None:
    """A fully differential group measured at its best mirror pair (GroupCensus.pair), one result a mode (Hurst and Lewis,
    1995: a break at one net of the pair would measure neither mode's loop); None when it has no such pair or the pair
    cannot be broken. The census names no pair when --driver was given (that asks for one net's split)."""
    if gc.pair is None:
        return None
    nodes = gc.pair
    cand = next(c for c in gc.group.candidates if c.node == nodes[0])
    try:
        pair = measure_pair(parsed, nodes, label=f"loop {gc.group.index}", **{k: v for k, v in options.items() if k in _PAIR_OPTIONS})
    except ProbeError as exc:
        _log.info("the pair %s,%s of %s could not be broken (%s): measured at one net", *nodes, gc.group.label, exc)
        return None
    why = (f"{nodes[0]} and {nodes[1]} are mirror images (a symmetry of the circuit swaps them and keeps the common-mode "
           "path), so the group is measured as a pair: its differential- and common-mode loops (Hurst and Lewis, 1995), "
           f"where a break at one of them would measure neither (the census at {cand.node} alone: "
           f"{why_at(gc.group, cand, gc.coarse_at(cand.node))})")
    return tuple(GroupResult(gc, replace(r, label=f"loop {gc.group.index} ({','.join(nodes)} {mode} mode)"), why=why)
                 for mode, r in pair.modes.items())


def _measure_group(parsed: Netlist, gc: GroupCensus, options: dict, retries: int = 2) -> tuple[GroupResult, ...]:
    """Measure a group: a fully differential one as a pair (_measure_as_pair), any other at its chosen break and, on a
    refusal or an inconclusive result, at the next usable candidates. A pair whose modes give no verdict is measured at
    one net too: an instability found there with every self-check passed is the circuit's, whatever the break (its margins
    are neither mode's, so only that verdict is taken from it); else the pair's inconclusive results stand."""
    as_pair = _measure_as_pair(parsed, gc, options)
    if as_pair is None:
        return (_measure_at_one_net(parsed, gc, options, retries),)
    if all(g.verdict != "inconclusive" for g in as_pair):
        return as_pair
    one = _measure_at_one_net(parsed, gc, options, retries)
    if one.result is None or one.result.verdict != "fail" or one.result.stable:
        return as_pair
    doubt = "; ".join(f"{g.label}: {g.result.failed_checks[0].detail}" for g in as_pair if g.verdict == "inconclusive" and g.result.failed_checks)
    note = (f"{gc.group.label}: measured as the pair {as_pair[0].result.breaks.node.split(' (')[0]}, no mode gave a verdict ({doubt}); "
            "at one net the loop is unstable with every self-check passed, which holds for the circuit whatever the break, but "
            "its margins are neither mode's")
    return (replace(one, result=replace(one.result, warnings=(*one.result.warnings, note))),)


def _measure_at_one_net(parsed: Netlist, gc: GroupCensus, options: dict, retries: int = 2) -> GroupResult:
    """Measure a group at its chosen break; on a refusal or an inconclusive result, at the next usable candidates."""
    group = gc.group
    if gc.chosen is None:
        return GroupResult(gc, None, gc.why, "name a node of the group and its driver: --at NODE --driver ELEMENT[.PIN] "
                           "(netloop loops NETLIST lists the candidates and why each was ruled out)")
    tried: list[str] = []
    first: tuple[LoopResult, str] | None = None
    chosen = next(c for c in group.candidates if c.break_name == gc.chosen)
    rings = gc.coarse_at(chosen.node).can_ring if gc.coarse_at(chosen.node) else None
    # After the chosen break, only breaks whose coarse T is as good a measurement (not about 0, falling at the top)
    # and tells the same story (|T| above 0 dB somewhere or not) are tried: never a lesser loop's T instead.
    others = [c for c in group.candidates[1:] if c.split_checked and not c.refused and c.opened
              and gc.coarse_at(c.node) is not None and gc.coarse_at(c.node).usable and gc.coarse_at(c.node).can_ring == rings]
    for cand in [chosen, *others][: 1 + retries]:
        label = f"loop {group.index} ({cand.break_name})"
        try:
            result = measure(parsed, cand.break_name, label=label, **options)
        except ProbeError as exc:
            tried.append(f"{cand.break_name} (the probe refused: {exc})")
            continue
        result = _with_closed_notes(group, cand, result)
        why = why_at(group, cand, gc.coarse_at(cand.node))
        if result.verdict != "inconclusive":
            if tried:
                result = replace(result, warnings=(*result.warnings, f"{group.label}: measured at {cand.break_name} after " + "; ".join(tried)))
            return GroupResult(gc, result, why=why, tried=tuple(tried))
        first = first or (result, why)
        doubt = result.failed_checks[0].detail if result.failed_checks else "inconclusive"
        tried.append(f"{cand.break_name} (inconclusive: {doubt})")
    if first is not None:
        return GroupResult(gc, first[0], why=first[1], tried=tuple(tried))
    return GroupResult(gc, None, "no candidate break of this group could be measured: " + "; ".join(tried),
                       "name a node of the group and its driver: --at NODE --driver ELEMENT[.PIN]", tried=tuple(tried))


def _with_closed_notes(group: LoopGroup, cand, result: LoopResult) -> LoopResult:
    """The result with a warning and a self-check ("opened-circuit") when the break leaves loops closed that are not local.

    A loop left closed may make the opened circuit unstable by itself, so the count P the Nyquist verdict
    used (0 unless given) may be wrong. The check fails, and the verdict is "inconclusive", when a rational
    fit of T finds another number of right-half-plane poles than P, when the closed-loop poles fitted from
    1/(1+T) disagree with the Nyquist count, or when no fit of T is possible and P was not given.
    """
    # Local loops kept closed on purpose (a Miller Cc with its stage) are stated in the reason, as common practice
    # measures the global loop with them closed; any other loop left closed is warned about and checked.
    other = tuple(k for k in cand.left_closed if k not in cand.kept_closed)
    if not other:
        return result
    extra = [_closed_note(group, cand.node, other)]
    p = result.analysis.nyquist.open_loop_rhp_poles
    rhp = opened_circuit_rhp_poles(result)
    poles = result.analysis.poles
    if rhp is not None and rhp != p:
        extra.append(f"a rational fit of the measured T has {rhp} right-half-plane pole(s): the opened circuit looks unstable by itself; "
                     f"if so, rerun with --open-loop-rhp-poles {rhp}")
        check = Check("opened-circuit", False,
                      f"breaking {cand.node} leaves {len(other)} loop(s) of {group.label} closed, and a rational fit of T finds {rhp} "
                      f"right-half-plane pole(s) of the opened circuit where the Nyquist count assumed P = {p}",
                      f"rerun with --open-loop-rhp-poles {rhp} if the opened circuit is unstable by itself, or break where no loop stays "
                      "closed (netloop loops NETLIST)")
    elif poles is not None and not poles.agrees_with_nyquist:
        extra.append("the closed-loop poles fitted from 1/(1+T) disagree with the Nyquist count made with P = "
                     f"{p}: another sign that P is not what was assumed")
        check = Check("opened-circuit", False,
                      f"breaking {cand.node} leaves {len(other)} loop(s) of {group.label} closed, and the closed-loop poles fitted from "
                      f"1/(1+T) disagree with the Nyquist count made with P = {p}",
                      "break where no loop stays closed (netloop loops NETLIST), or give the opened circuit's RHP poles with --open-loop-rhp-poles")
    elif rhp is not None:
        check = Check("opened-circuit", True, f"the loops left closed at {cand.node} add no right-half-plane pole to T (rational fit)")
    elif result.analysis.nyquist.open_loop_rhp_from == "given":
        check = Check("opened-circuit", True, f"the loops left closed at {cand.node}: no rational fit of T was possible; P = {p} as given")
    else:  # nothing read from the data vouches for P: no verdict on it
        check = Check("opened-circuit", False,
                      f"breaking {cand.node} leaves {len(other)} loop(s) of {group.label} closed, and no rational fit of T was possible, "
                      f"so nothing shows that the opened circuit has the P = {p} right-half-plane poles the Nyquist count used",
                      "break where no loop stays closed (netloop loops NETLIST), or give the opened circuit's RHP poles with "
                      "--open-loop-rhp-poles")
    return replace(result, warnings=tuple(dict.fromkeys((*result.warnings, *extra))), checks=(*result.checks, check))


def _group_nets(group: LoopGroup) -> list[str]:
    """The nets of a group's loops, its candidates first (in rank order)."""
    return [*(c.node for c in group.candidates), *(n for loop in group.loops for s in loop.steps for n in (s.source, *s.through))]


def check_loops(netlist: Netlist | str | PathLike[str], **measure_options) -> LoopsCheck:
    """Every loop group, measured on its own at the break the census chooses (netloop.jobs.census).

    ``measure_options`` are those of netloop.jobs.measure.measure (except ``at`` and ``label``); one
    simulator serves the census and every measurement unless one is given. A group that cannot be
    broken, or whose measurement fails its self-checks at every break tried, is "inconclusive" with
    the reason; the others still get their results. Raises ProbeError only when the netlist has no
    loop at all, or ``driver`` is given for several groups.
    """
    parsed = load_netlist(netlist)
    options = {k: v for k, v in measure_options.items() if k not in ("at", "label")}
    driver = options.get("driver")
    if driver is None:
        options.pop("driver", None)
    circuit = flatten(parsed)
    _log.info("finding the loops of %d elements", len(circuit))
    found = find_loops(circuit)
    if not found.groups:
        with caveats_on_error(parsed):
            raise ProbeError(f"no feedback loop found in {parsed.source}: no signal path leads from a node back to itself "
                             "without passing through ground or a supply; name a node with --at to break it anyway")
    if driver is not None and len(found.groups) > 1:
        raise ProbeError(f"--driver names one break's driver, but {parsed.source} has {len(found.groups)} loop groups; give --at too")
    own = options.get("simulator") is None
    processes = options.pop("processes", None)
    if own:
        options["simulator"] = own_simulator(processes, parsed, 2, options.pop("keep_decks", None))
    try:
        census = _census(parsed, circuit, found, sweep=True, simulator=options["simulator"], method=options.get("method", "tian"),
                         split_checks=DEFAULT_SPLIT_CHECKS, coarse_breaks=COARSE_BREAKS, driver=driver, keep_decks=None,
                         timeout_s=options.get("timeout_s", 600.0))
        groups = tuple(r for gc in census.groups for r in _measure_group(parsed, gc, options))
    finally:
        if own and hasattr(options["simulator"], "close"):
            options["simulator"].close()
    notes = list(census.notes)
    for g in groups:
        if g.result is not None:
            notes.append(f"{g.result.label}: broken at {g.result.breaks.node}: {g.why}")
            notes.extend(f"{g.census.label}: passed over {p}" for p in g.census.passed_over)
        else:
            notes.append(f"{g.census.label}: not measured: {g.reason}")
    return LoopsCheck(census, groups, tuple(notes))


def measure_all_loops(netlist: Netlist | str | PathLike[str], **measure_options) -> tuple[list[LoopResult], list[str]]:
    """Every loop group measured at the break the census chooses; returns (results, notes).

    check_loops with the older shape: the results of the groups measured and the notes. Raises
    ProbeError when the netlist has no loop or when a group could not be measured (check_loops
    reports such a group as inconclusive instead).
    """
    check = check_loops(netlist, **measure_options)
    missing = [g for g in check.groups if g.result is None]
    if missing:
        raise ProbeError("; ".join(f"{g.census.label}: no node of the group could be broken: {g.reason}" for g in missing))
    return list(check.results), list(check.notes)
