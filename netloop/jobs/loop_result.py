"""The record of one measured loop: where it was broken, how it was simulated, and what the analysis found."""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal, NoReturn

from netloop.analysis.requirements import RequirementOutcome, parse_requirements
from netloop.analysis.results import Check, LoopAnalysis
from netloop.errors import NetloopError, SimulationError

if TYPE_CHECKING:  # reports read LoopResults without loading the netlist stage
    from netloop.netlist import Netlist

__all__ = ["CAUTION", "COMMON_PRACTICE", "VERDICTS", "BreakInfo", "LoopResult", "SimInfo", "Verdict", "caveats_on_error",
           "combined_verdict", "netlist_notes", "raise_placed"]

Verdict = Literal["pass", "fail", "inconclusive"]
VERDICTS: tuple[Verdict, ...] = ("pass", "fail", "inconclusive")
"""What a measured loop promises:

pass          every self-check passed, the loop is stable by the Nyquist count and every requirement is met;
fail          every self-check passed, and the loop is unstable or a requirement failed;
inconclusive  a self-check failed: the data supports no verdict (the result says why and what to try).
"""

COMMON_PRACTICE = ("pm>=45", "gm>=10", "peak<=3")
"""Rules of thumb said beside a PASS when no requirement was given (common practice, no source): a phase
margin of 45 to 60 deg (45 the least), a gain margin of 10 dB, closed-loop peaking under 3 dB. They never
change the verdict: only requirements the user gives do."""

CAUTION = (
    "Small-signal margins around one operating point do not prove large-signal stability; "
    "sign-off follows your team's verification flow and the foundry's guidance."
)


@dataclass(frozen=True, slots=True)
class BreakInfo:
    """Where and how the loop was broken (plain strings, copied from the probe stage)."""

    node: str  # as the user named it, lower-case ("xamp.n5")
    side_a: str  # driver-side node name in the probe deck
    side_b: str  # load-side node name in the probe deck
    driver_terminals: tuple[str, ...]  # "m6.d", "xamp.out"
    load_terminals: tuple[str, ...]
    shunt_terminals: tuple[str, ...]  # connect the node only to AC ground: either side gives the same T
    decided_by: str  # one sentence: how the driver side was chosen
    silenced_sources: tuple[str, ...]  # independent sources whose AC magnitude the probe deck set to 0
    copied_subcircuits: tuple[tuple[str, str], ...] = ()  # (original, copy) for a break inside one instance
    load_readers: tuple[str, ...] = ()  # no load terminal: the behavioural elements ("g1") whose expression reads the load side


@dataclass(frozen=True, slots=True)
class SimInfo:
    """How the return ratio was simulated."""

    backend: str  # "shared" or "batch" or "analytic"
    points: int  # frequency points in the final data
    refinement_rounds: int
    refined: bool  # True when the worst phase margin settled within the tolerance
    convergence_aid: str | None  # the aid that made the operating point converge, if one was needed
    deck_path: str | None  # where the probe deck was kept (--keep-decks), else None
    seconds: float  # wall time of the simulations
    processes: int = 1  # ngspice processes that shared each job's runs (netloop.sim.SplitRunsSimulator)
    loads: int = 1  # times ngspice read the netlist (and its model files) for this measurement; 0: it ran on a circuit already loaded
    # what ngspice itself worked (netloop.sim.SimResult.ngspice_seconds): with one ngspice process a part of ``seconds``, the
    # rest netloop's; with several (``processes``) the sum of theirs, which may exceed ``seconds``
    ngspice_seconds: float = 0.0


@dataclass(frozen=True, slots=True)
class LoopResult:
    """One loop, measured: the answer `netloop check` reports and corner runs collect."""

    netlist: str  # the netlist's path as given ("<string>" for text)
    label: str  # a corner name or a loop name; "" for a single check
    method: str  # "tian" or "middlebrook"
    breaks: BreakInfo
    analysis: LoopAnalysis
    requirements: tuple[RequirementOutcome, ...]
    ignored_statements: tuple[str, ...]  # "file:line: .tran 1n 1u" — never run by netloop
    warnings: tuple[str, ...]  # from the probe, the simulation and the analysis, in that order
    sim: SimInfo
    caution: str = CAUTION
    checks: tuple[Check, ...] = ()  # self-checks the job ran beyond the analysis's own (analysis.checks)
    # what in the netlist may make the verdict answer another circuit than the one meant (Netlist.caveats: the title
    # line reads as an element, a .control block is left open or changes a source, parameter or the temperature);
    # said beside the verdict, and also in warnings
    caveats: tuple[str, ...] = ()
    library_warnings: tuple[str, ...] = ()  # about library content the circuit does not use (one line in warnings)

    @property
    def all_checks(self) -> tuple[Check, ...]:
        """Every self-check of this measurement: the analysis's, then the job's."""
        return (*self.analysis.checks, *self.checks)

    @property
    def failed_checks(self) -> tuple[Check, ...]:
        return tuple(c for c in self.all_checks if not c.passed)

    @property
    def verdict(self) -> Verdict:
        """"inconclusive" when a self-check failed, else "pass" (stable, every requirement met) or "fail"."""
        if self.failed_checks:
            return "inconclusive"
        return "pass" if self.analysis.stable and all(r.passed for r in self.requirements) else "fail"

    @property
    def below_common_practice(self) -> tuple[RequirementOutcome, ...]:
        """The rules of COMMON_PRACTICE that a passing loop misses when no requirement was given (a margin
        that does not exist, such as the phase margin of a loop that does not regulate, is not a shortfall);
        empty when requirements were given or the verdict is not "pass"."""
        if self.requirements or self.verdict != "pass":
            return ()
        outcomes = (rule.check(self.analysis) for rule in parse_requirements(COMMON_PRACTICE))
        return tuple(o for o in outcomes if o.value is not None and not o.passed)

    @property
    def stable(self) -> bool:
        """The Nyquist verdict."""
        return self.analysis.stable

    @property
    def passed(self) -> bool:
        """The verdict is "pass": every self-check passed, stable, every requirement met."""
        return self.verdict == "pass"

    @property
    def failed_requirements(self) -> tuple[RequirementOutcome, ...]:
        return tuple(r for r in self.requirements if not r.passed)


def combined_verdict(verdicts: Iterable[Verdict]) -> Verdict:
    """One verdict for several loops (groups, modes, corners): "fail" when any failed, else
    "inconclusive" when any was, else "pass" (also for none)."""
    seen = set(verdicts)
    if "fail" in seen:
        return "fail"
    return "inconclusive" if "inconclusive" in seen else "pass"


def netlist_notes(netlist: Netlist, *later: Iterable[str]) -> dict:
    """A LoopResult's ``warnings``, ``caveats`` and ``library_warnings`` from its netlist: the netlist's own warnings
    (caveats first), then ``later`` (the probe's, the simulation's, the analysis's), then the one line that counts the
    warnings about library content the circuit does not use; each warning once."""
    folded = bool(netlist.library_warnings)
    own = netlist.warnings[:-1] if folded else netlist.warnings
    tail = netlist.warnings[-1:] if folded else ()
    warnings = tuple(dict.fromkeys((*own, *(w for ws in later for w in ws), *tail)))
    return {"warnings": warnings, "caveats": netlist.caveats, "library_warnings": netlist.library_warnings}


@contextmanager
def caveats_on_error(netlist: Netlist) -> Iterator[None]:
    """A NetloopError raised inside carries the netlist's caveats as notes (an unknown node or no loop at all is often
    what a title line read as an element or an unclosed .control block leaves): the CLI prints them under the error.
    A SimulationError whose cause ngspice tied to a card of the netlist leads with that card's file:line."""
    try:
        yield
    except NetloopError as exc:
        for caveat in netlist.caveats:
            exc.add_note(caveat)
        raise_placed(exc, netlist)


def raise_placed(exc: NetloopError, netlist: Netlist) -> NoReturn:
    """Raise ``exc``, or in its place (and from it) the error _placed makes of it, with ``exc``'s notes."""
    placed = _placed(exc, netlist)
    if placed is exc:
        raise exc
    for note in getattr(exc, "__notes__", ()):
        placed.add_note(note)
    raise placed from exc


def _placed(exc: NetloopError, netlist: Netlist) -> NetloopError:
    """``exc`` led by the file:line of the first card ngspice blamed that the netlist holds (ngspice numbers the lines
    of netloop's own deck, which no user has seen), or ``exc`` itself when it blamed none or is not a SimulationError."""
    from netloop.netlist.locate import card_location  # noqa: PLC0415 - only a failed simulation needs it

    if not isinstance(exc, SimulationError) or not exc.cards:
        return exc
    where = next((loc for card in exc.cards if (loc := card_location(netlist, card)) is not None), None)
    if where is None or exc.message.startswith(f"{where.file}:{where.line}:"):
        return exc
    return SimulationError(f"{where}: {exc.message}", deck_path=exc.deck_path, simulator_output=exc.simulator_output,
                           corner=exc.corner, log_path=exc.log_path, cards=exc.cards)
