"""One sample's probed netlists, rewritten for the next sample of its corner.

The samples of a statistical corner differ only in ngspice's seed, an ``.option seed=N`` line. The
probe never reads ``.option`` lines (they change no element, node or value the split rules look
at), so the split of the next sample is the kept one with its ``.option`` lines swapped for the new
netlist's: the same netlist break_loop would build afresh (tests/jobs/test_kept_probes.py), without
breaking, chaining and checking the loop again for every sample. Anything else that differs, or a
probed netlist that no longer holds the kept ``.option`` statement itself, means no reuse.
"""

from __future__ import annotations

from dataclasses import dataclass, fields, replace

from netloop.netlist import Netlist
from netloop.netlist.model import Directive, Statement
from netloop.probe import ProbedNetlist
from netloop.probe.chain import Chain

__all__ = ["KeptProbes", "option_swaps", "rewritten"]

# every field of a Netlist that counts in its equality but its statements: equal for two samples of one corner
_SAME = tuple(f.name for f in fields(Netlist) if f.compare and f.name != "statements")


@dataclass(frozen=True, slots=True)
class KeptProbes:
    """What measure found on one sample's netlist: the split as simulated first, the split after the loop check, and
    the chain of the other placement (None when there is none)."""

    netlist: Netlist
    unchecked: ProbedNetlist
    checked: ProbedNetlist
    chain: Chain | None


def option_swaps(kept: Netlist, now: Netlist) -> dict[int, Statement] | None:
    """{id(a statement of ``kept``): the statement of ``now`` in its place} for the ``.option`` lines where the two
    differ; None when anything else differs (another statement, their number, or any other field)."""
    if any(getattr(kept, name) != getattr(now, name) for name in _SAME) or len(kept.statements) != len(now.statements):
        return None
    swaps: dict[int, Statement] = {}
    for old, new in zip(kept.statements, now.statements, strict=True):
        if old is new or old == new:
            continue
        if not (_is_option(old) and _is_option(new)):
            return None
        swaps[id(old)] = new
    return swaps


def _is_option(statement: Statement) -> bool:
    return isinstance(statement, Directive) and statement.keyword == ".option"


def _swapped(netlist: Netlist, swaps: dict[int, Statement]) -> Netlist | None:
    if sum(id(s) in swaps for s in netlist.statements) != len(swaps):
        return None  # a kept .option statement is not there as it was: probe afresh
    return replace(netlist, statements=tuple(swaps.get(id(s), s) for s in netlist.statements), _index={})


def _probed(probed: ProbedNetlist, swaps: dict[int, Statement], done: dict[int, Netlist | None]) -> ProbedNetlist | None:
    """``probed`` on its netlist with ``swaps`` made; ``done``: the netlists already rewritten, by id, so that records
    sharing one netlist (the split before and after the loop check) share its rewrite too, made once."""
    key = id(probed.netlist)
    if key not in done:
        done[key] = _swapped(probed.netlist, swaps)
    return None if done[key] is None else replace(probed, netlist=done[key])


def rewritten(kept: KeptProbes, now: Netlist) -> tuple[ProbedNetlist, ProbedNetlist, Chain | None] | None:
    """(unchecked, checked, chain) of ``kept`` for ``now``, a netlist that differs from the kept one in ``.option`` lines
    only; None when it differs otherwise."""
    swaps = option_swaps(kept.netlist, now)
    if swaps is None:
        return None
    if not swaps:
        return kept.unchecked, kept.checked, kept.chain
    done: dict[int, Netlist | None] = {}  # the kept records are alive meanwhile, so their netlists' ids stay theirs
    unchecked, checked = _probed(kept.unchecked, swaps, done), _probed(kept.checked, swaps, done)
    first = _probed(kept.chain.first, swaps, done) if kept.chain is not None else None
    if unchecked is None or checked is None or (kept.chain is not None and first is None):
        return None
    return unchecked, checked, replace(kept.chain, first=first) if kept.chain is not None else None
