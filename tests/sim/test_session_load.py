"""A deck given to the ngspice session in pieces reaches ngspice as the same lines, however its small pieces are joined."""

from __future__ import annotations

from hypothesis import given
from hypothesis import strategies as st

from netloop.sim.session import _BLOCK_MIN_CHARS, _lines_block, _runs_joined

_LINES = st.lists(st.sampled_from(["r1 a b 1k", "", "  ", "* note", "+ w=1", "c1 b 0 1p\r", "x\r\n"]), max_size=4)
_SMALL = _LINES.map("\n".join) | st.sampled_from(["", "\n", "tail\n", "\r"])
_LARGE = st.sampled_from(["* library\n" + "m " * _BLOCK_MIN_CHARS, "* other\r\n" + "n\n" * _BLOCK_MIN_CHARS])


def _lines(pieces) -> list[str]:
    """The non-blank lines ngspice is given for these pieces (as netloop.sim.session._lines_block splits each)."""
    return [line for piece in pieces for line in piece.splitlines() if line.strip()]


@given(st.lists(_SMALL | _LARGE, max_size=8))
def test_joined_pieces_give_the_same_lines_in_the_same_order(pieces):
    """The lines of the joined pieces are those of the deck the pieces join to (the reference: the deck as one string);
    the large pieces are passed on as the very same strings, kept (the loader keeps what it derives from those), and
    the small ones joined, one string a run, never kept."""
    joined = _runs_joined(pieces)
    assert _lines(piece for piece, _ in joined) == _lines(["\n".join(pieces)])
    assert [piece for piece, keep in joined if keep] == [p for p in pieces if len(p) >= _BLOCK_MIN_CHARS]
    assert all(any(piece is p for p in pieces) for piece, keep in joined if keep)
    kept = [keep for _, keep in joined]
    assert not any(a == b == False for a, b in zip(kept, kept[1:]))  # noqa: E712 - two runs of small pieces never meet


@given(_SMALL | _LARGE)
def test_a_piece_reaches_ngspice_as_its_own_non_blank_lines(piece):
    """The C buffer of a piece (_lines_block) holds its non-blank lines, each ended by a NUL where the start table points:
    read back through cffi they are the lines str.splitlines gives (the reference), none for a piece of blank lines."""
    from PySpice.Spice.NgSpice.Shared import ffi  # noqa: PLC0415 - the ffi the session loads through (no library needed)

    buffer, address, starts = _lines_block(ffi, piece, keep=False)
    assert starts.dtype == "int64" and starts.ndim == 1
    got = [ffi.string(ffi.cast("char *", address + int(start))).decode("utf-8") for start in starts]
    assert got == _lines([piece])
    assert int(ffi.cast("uintptr_t", buffer)) == address


def test_the_loader_keeps_at_most_its_share_of_large_pieces():
    """Large pieces kept for the next load (a library written out) are at most _BLOCKS_KEEP, however many are loaded."""
    from PySpice.Spice.NgSpice.Shared import ffi  # noqa: PLC0415

    from netloop.sim import session  # noqa: PLC0415

    saved = dict(session._BLOCKS)
    try:
        for i in range(3 * session._BLOCKS_KEEP):
            _lines_block(ffi, f"* library {i}\n" + "m " * _BLOCK_MIN_CHARS, keep=True)
            assert 1 <= len(session._BLOCKS) <= session._BLOCKS_KEEP
    finally:
        session._BLOCKS.clear()
        session._BLOCKS.update(saved)
