"""One sample's probed netlists rewritten for the next sample of its corner are the netlists break_loop builds afresh."""

from __future__ import annotations

from netloop.jobs.corners.apply import apply_settings
from netloop.jobs.corners.plan import Setting
from netloop.jobs.kept_probes import KeptProbes, option_swaps, rewritten
from netloop.jobs.measure_checks import other_placements
from netloop.netlist import parse_file, write_netlist
from netloop.probe import split_loop
from netloop.probe.chain import chain_probes


def _sample(netlist, *settings: tuple[str, str, str]):
    return apply_settings(netlist, tuple(Setting(kind, target, value) for kind, target, value in settings))


def _kept(netlist, at: str) -> KeptProbes:
    unchecked, check = split_loop(netlist, at)
    places = other_placements(unchecked)
    chain = chain_probes(netlist, at, unchecked, places[0]) if places else None
    return KeptProbes(netlist, unchecked, check(), chain)


def test_the_next_seed_gets_the_split_probed_afresh(circuits):
    """The Miller buffer of seed 1, broken at out (with the chain of Cc's other placement), rewritten for seed 2: every
    netlist written out is the one of seed 2 broken and chained afresh, the seed line included, and the records agree
    in all else (sides, probe sources, vectors, the loop check's warnings)."""
    base = parse_file(circuits / "miller_buffer.cir")
    first, second = _sample(base, ("seed", "", "1")), _sample(base, ("seed", "", "2"))
    kept = _kept(first, "out")
    assert kept.chain is not None  # the chained netlist is rewritten too
    unchecked, checked, chain = rewritten(kept, second)
    fresh = _kept(second, "out")
    for got, want in ((unchecked, fresh.unchecked), (checked, fresh.checked), (chain.first, fresh.chain.first)):
        assert write_netlist(got.netlist) == write_netlist(want.netlist)
        assert ".option seed=2" in write_netlist(got.netlist) and ".option seed=1" not in write_netlist(got.netlist)
        assert (got.side_a, got.side_b, got.series_source, got.vectors, got.warnings) == (want.side_a, want.side_b, want.series_source,
                                                                                       want.vectors, want.warnings)
    assert (chain.series_source, chain.side_a, chain.vectors) == (fresh.chain.series_source, fresh.chain.side_a, fresh.chain.vectors)
    assert kept.unchecked.netlist is kept.checked.netlist and unchecked.netlist is checked.netlist  # as the loop check leaves it


def test_anything_but_an_option_line_means_probing_afresh(circuits):
    """Two netlists that differ in a temperature, a .param value or an element value are not one corner's samples:
    nothing is rewritten; the same netlist gives the kept records themselves."""
    base = parse_file(circuits / "miller_buffer.cir")
    first = _sample(base, ("seed", "", "1"))
    kept = _kept(first, "out")
    for other in (("temp", "", "85"), ("param", "cc", "1.0p")):
        assert option_swaps(first, _sample(base, ("seed", "", "1"), other)) is None
        assert rewritten(kept, _sample(base, ("seed", "", "1"), other)) is None
    assert rewritten(kept, first) == (kept.unchecked, kept.checked, kept.chain)


def _without(probed, statement):
    """``probed`` whose netlist no longer holds ``statement`` itself (an equal copy in its place): as if the probe had
    rewritten it."""
    from dataclasses import replace

    copy = replace(statement)
    return replace(probed, netlist=replace(probed.netlist, statements=tuple(copy if s is statement else s
                                                                           for s in probed.netlist.statements), _index={}))


def test_a_split_that_lost_the_kept_option_line_is_probed_afresh(circuits):
    """When any one of the kept records (the split, the checked split, the chain's netlist) no longer holds the kept
    .option statement itself, nothing is rewritten: the seed line could not be swapped in it."""
    from dataclasses import replace

    base = parse_file(circuits / "miller_buffer.cir")
    first, second = _sample(base, ("seed", "", "1")), _sample(base, ("seed", "", "2"))
    kept = _kept(first, "out")
    seed = first.statements[0]
    assert seed.text == ".option seed=1"
    for lost in (replace(kept, unchecked=_without(kept.unchecked, seed)), replace(kept, checked=_without(kept.checked, seed)),
                 replace(kept, chain=replace(kept.chain, first=_without(kept.chain.first, seed)))):
        assert rewritten(lost, second) is None


def test_a_split_without_a_chain_and_equal_copies_of_statements(circuits):
    """A split with no chain is rewritten with none; two reads of the same file (equal statements, not the same objects)
    still differ in the seed line only; the rewritten netlist answers for its elements as the fresh one does."""
    from dataclasses import replace

    first = _sample(parse_file(circuits / "miller_buffer.cir"), ("seed", "", "1"))
    second = _sample(parse_file(circuits / "miller_buffer.cir"), ("seed", "", "2"))
    assert first.statements[1] is not second.statements[1] and first.statements[1] == second.statements[1]
    kept = replace(_kept(first, "out"), chain=None)
    unchecked, checked, chain = rewritten(kept, second)
    assert chain is None
    fresh = _kept(second, "out")
    assert write_netlist(checked.netlist) == write_netlist(fresh.checked.netlist)
    assert checked.netlist.elements == fresh.checked.netlist.elements and unchecked.netlist.elements == fresh.unchecked.netlist.elements


def test_an_option_line_against_another_statement_is_no_seed_change(circuits):
    """The kept netlist's .option seed line facing a .param line in the other (the same number of statements) is a
    different netlist, not another seed."""
    from dataclasses import replace

    from netloop.netlist.model import Directive

    base = parse_file(circuits / "miller_buffer.cir")
    first = _sample(base, ("seed", "", "1"))
    other = replace(base, statements=(Directive(".param", ".param zz=1", first.statements[0].location), *base.statements), _index={})
    assert len(other.statements) == len(first.statements)
    assert option_swaps(first, other) is None and option_swaps(other, first) is None
