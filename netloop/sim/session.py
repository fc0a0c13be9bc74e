"""One ngspice shared-library instance driven through PySpice's low-level API, quietly.

Used only inside the worker process (netloop/sim/worker.py): PySpice's logging, its version
warning and its "every stderr line is an error" rule stay there; callers get plain lines and arrays.
"""

from __future__ import annotations

import logging
import time
import warnings
from collections.abc import Sequence

import numpy as np

from netloop.sim.library import NGSPICE_THREADS

__all__ = ["NgspiceSession"]


def _silence_pyspice() -> None:
    logger = logging.getLogger("PySpice")
    logger.setLevel(logging.CRITICAL + 1)
    logger.propagate = False
    logger.addHandler(logging.NullHandler())


_BLOCKS: dict[str, tuple[object, int, np.ndarray]] = {}  # a large piece of a deck -> _lines_block of it
_BLOCK_MIN_CHARS = 1 << 16  # pieces kept from this size (a library written out: the same string for every sample)
_BLOCKS_KEEP = 8  # pieces kept at most (then forgotten all at once)


def _lines_block(ffi, piece: str, keep: bool) -> tuple[object, int, np.ndarray]:
    """The non-blank lines of ``piece`` in one C buffer, each ended by a NUL, in UTF-8: (the buffer, its address, where
    each line starts in it). Kept when ``keep`` (a large piece): a sky130 library written out is 1.6 MB in 360 lines, about
    2.5 ms to split, encode and copy on every load. ngspice copies the lines it is given (ngSpice_Circ), so a kept buffer
    is never changed (tests/sim/test_used_models.py checks it)."""
    kept = _BLOCKS.get(piece) if keep else None
    if kept is not None:
        return kept
    lines = [line for line in piece.splitlines() if line.strip()]
    text = "".join(f"{line}\0" for line in lines).encode("utf-8")
    raw = np.frombuffer(text, dtype=np.uint8)
    starts = np.concatenate(([0], np.flatnonzero(raw[:-1] == 0) + 1)).astype(np.int64) if lines else np.zeros(0, dtype=np.int64)
    buffer = ffi.new("char[]", text)
    block = (buffer, int(ffi.cast("uintptr_t", buffer)), starts)
    if keep:
        if len(_BLOCKS) >= _BLOCKS_KEEP:
            _BLOCKS.clear()
        _BLOCKS[piece] = block
    return block


def _runs_joined(pieces: Sequence[str]) -> list[tuple[str, bool]]:
    """The pieces of a deck, each with whether its lines block is kept (_lines_block): the large ones (from
    _BLOCK_MIN_CHARS) as they are, kept; each run of small ones between them joined with newlines into one, never kept
    (a sample's own lines differ from the last). The same non-blank lines in the same order: a piece holds whole lines,
    and a join can only add or merge blank lines, which _lines_block drops. A sky130 sample's deck comes in 24 pieces,
    23 of them a few lines each: a buffer for each of those cost 0.17 ms more a load (load timed in the ngspice process
    while 74 samples' recorded jobs ran)."""
    out: list[tuple[str, bool]] = []
    small: list[str] = []
    for piece in pieces:
        if len(piece) < _BLOCK_MIN_CHARS:
            small.append(piece)
            continue
        if small:
            out.append(("\n".join(small), False))
            small = []
        out.append((piece, True))
    if small:
        out.append(("\n".join(small), False))
    return out


_FORGET_EVERY = 1000  # commands between two releases of ngspice's memory of past commands (NgspiceSession.command)


def _lean(shared_class, ffi):
    """PySpice's NgSpiceShared with its output callbacks cut down, once started (``lean`` set), to handing each line on.

    PySpice's own keep every line ngspice prints, in two lists that grow for the life of the process (about 23 kB a
    sample of the sky130 statistical bench: gigabytes over a long run), and log each line on the way (about 1 ms a
    sample, inside ngspice's calls). While PySpice starts, its own callbacks run: it reads ngspice's version from them.
    """

    class Lean(shared_class):
        lean = False

        @staticmethod
        def _send_char(message_c, ngspice_id, user_data):
            self = ffi.from_handle(user_data)
            if not self.lean:
                return shared_class._send_char(message_c, ngspice_id, user_data)
            return self.send_char(ffi.string(message_c).decode("utf-8", "replace"), ngspice_id)

        @staticmethod
        def _send_stat(message_c, ngspice_id, user_data):
            return 0  # progress messages ("ac: 50%"): nobody reads them

    return Lean


class NgspiceSession:
    """A loaded libngspice: load circuits, run commands, read vectors as numpy arrays."""

    def __init__(self, library_path: str):
        _silence_pyspice()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            from PySpice.Spice.NgSpice.Shared import NgSpiceShared, ffi  # noqa: PLC0415

            NgSpiceShared.LIBRARY_PATH = library_path.replace("{", "{{").replace("}", "}}")
            self._lines: list[str] = []
            self._ffi = ffi
            # seconds spent inside ngspice's circuit and command calls (its output lines included, which it hands to
            # _on_char as it prints them): ngspice's own time, against which netloop's own cost is measured
            self.seconds = 0.0
            self._ng = _lean(NgSpiceShared, ffi)(ngspice_id=0, send_data=False)
        self._ng.clear_output()  # what PySpice kept while it started
        self._ng.lean = True
        self._ng.send_char = self._on_char  # every output line comes here
        self._commands = 0
        self._lib = self._ng._ngspice_shared
        self.version = str(self._ng.ngspice_version)
        self._lib.ngSpice_Command(f"set num_threads={NGSPICE_THREADS}".encode())  # see NGSPICE_THREADS
        voltage = self._ng.simulation_type.voltage
        self._voltage_type = int(getattr(voltage, "value", voltage))

    def _on_char(self, message: str, ngspice_id: int) -> int:
        _, _, content = message.partition(" ")  # "stdout ..." / "stderr ..."
        self._lines.append(content.rstrip())
        return 0

    def command(self, command: str) -> list[str]:
        """Run one ngspice command; returns what ngspice printed meanwhile."""
        self._lines = []
        encoded = command.encode("utf-8")
        self._commands += 1
        start = time.perf_counter()
        if self._commands % _FORGET_EVERY == 0:
            # ngspice keeps every command it was given (about 400 bytes each, 15 kB a sample of a statistical run) until
            # it is given none (NULL), as PySpice's own command method does every 10,000 commands
            self._lib.ngSpice_Command(self._ffi.NULL)
        rc = self._lib.ngSpice_Command(encoded)
        self.seconds += time.perf_counter() - start
        if rc:
            self._lines.append(f"Error: ngspice refused the command {command!r} (return code {rc})")
        return self._lines

    def load(self, deck: str | Sequence[str]) -> list[str]:
        """Load a circuit: text ending in ``.end``, or that text in pieces of whole lines whose join with newlines it is
        (netloop.sim.used_models.used_pieces); returns what ngspice printed meanwhile."""
        ffi = self._ffi
        # A buffer of NUL-terminated lines a piece and an array of pointers into them: a char[] for each of 100k lines
        # cost about 70 ms, all of it before ngspice can start reading.
        pieces = _runs_joined((deck,) if isinstance(deck, str) else deck)
        blocks = [_lines_block(ffi, piece, keep) for piece, keep in pieces]
        starts = np.concatenate([np.zeros(0, dtype=np.int64), *(where + address for _, address, where in blocks)])
        addresses = starts.astype(np.dtype(f"u{ffi.sizeof('char *')}"))
        table = ffi.new("char *[]", starts.size + 1)  # zeroed: the last entry is the NULL ngspice stops at
        ffi.memmove(table, addresses.tobytes(), addresses.nbytes)
        self._lines = []
        start = time.perf_counter()
        rc = self._lib.ngSpice_Circ(table)  # the buffers in ``blocks`` live until it returns
        self.seconds += time.perf_counter() - start
        if rc:
            self._lines.append(f"Error: ngspice refused the circuit (return code {rc})")
        return self._lines

    def current_plot(self) -> str:
        return self._ffi.string(self._lib.ngSpice_CurPlot()).decode()

    def vector_names(self, plot: str) -> list[str]:
        names = self._lib.ngSpice_AllVecs(plot.encode("utf-8"))
        out, i = [], 0
        while names[i] != self._ffi.NULL:
            out.append(self._ffi.string(names[i]).decode())
            i += 1
        return out

    def vector(self, plot: str, name: str) -> np.ndarray | None:
        """A copy of vector ``name`` of ``plot`` (float64 or complex128), or None if there is none."""
        info = self._lib.ngGet_Vec_Info(f"{plot}.{name}".encode("utf-8"))
        return None if info == self._ffi.NULL else self._copy(info)

    def rows(self, plot: str, names: Sequence[str], length: int) -> np.ndarray | None:
        """Vectors ``names`` of ``plot``, each ``length`` long, as the rows of one complex128 array (a real vector's
        imaginary parts 0, as numpy converts it), or None when one of them is missing; ValueError when one has another
        length. One array a sweep, not one a vector: fewer to merge and to pickle (netloop.sim.session_job)."""
        out = np.empty((len(names), length), dtype=np.complex128)
        for row, name in zip(out, names, strict=True):
            info = self._lib.ngGet_Vec_Info(f"{plot}.{name}".encode("utf-8"))  # ngspice's one static record: read at once
            if info == self._ffi.NULL:
                return None
            if info.v_length != length:
                raise ValueError(f"ngspice's vector {name!r} has {info.v_length} points, not {length}")
            row[:] = self._view(info)
        return out

    def _copy(self, info) -> np.ndarray:
        return self._view(info).copy()

    def _view(self, info) -> np.ndarray:
        """The data of a vector in ngspice's own memory (valid until the plot is destroyed)."""
        ffi, length = self._ffi, info.v_length
        if info.v_compdata != ffi.NULL:  # ngspice's complex (real, imaginary) doubles: numpy's complex128 layout
            return np.frombuffer(ffi.buffer(info.v_compdata, length * 16), dtype=np.complex128)
        if info.v_realdata != ffi.NULL:
            return np.frombuffer(ffi.buffer(info.v_realdata, length * 8), dtype=np.float64)
        return np.zeros(0)

    def node_voltages(self, plot: str) -> dict[str, float]:
        """Every circuit node voltage of an operating-point plot (device-internal ``#`` nodes left out)."""
        out = {}
        for name in self.vector_names(plot):
            if "#" in name or "(" in name:
                continue
            info = self._lib.ngGet_Vec_Info(f"{plot}.{name}".encode("utf-8"))
            if info == self._ffi.NULL or info.v_type != self._voltage_type or info.v_length < 1:
                continue
            if info.v_realdata != self._ffi.NULL:
                out[name.lower()] = float(info.v_realdata[0])
            elif info.v_compdata != self._ffi.NULL:
                out[name.lower()] = float(info.v_compdata[0].cx_real)
        return out

    def clear(self) -> None:
        """Remove the circuit and every plot, ready for the next job."""
        self.command("destroy all")
        self.command("remcirc")
