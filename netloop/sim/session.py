"""One ngspice shared-library instance driven through PySpice's low-level API, quietly.

Used only inside the worker process (netloop/sim/worker.py): PySpice's logging, its version
warning and its "every stderr line is an error" rule stay there; callers get plain lines and arrays.
"""

from __future__ import annotations

import logging
import warnings

import numpy as np

from netloop.sim.library import NGSPICE_THREADS

__all__ = ["NgspiceSession"]



def _silence_pyspice() -> None:
    logger = logging.getLogger("PySpice")
    logger.setLevel(logging.CRITICAL + 1)
    logger.propagate = False
    logger.addHandler(logging.NullHandler())


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
            self._ng = NgSpiceShared(ngspice_id=0, send_data=False)
        self._ng.send_char = self._on_char  # PySpice forwards every output line here
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
        rc = self._lib.ngSpice_Command(command.encode("utf-8"))
        if rc:
            self._lines.append(f"Error: ngspice refused the command {command!r} (return code {rc})")
        return self._lines

    def load(self, deck_text: str) -> list[str]:
        """Load a circuit (text ending in ``.end``); returns what ngspice printed meanwhile."""
        ffi = self._ffi
        lines = [line for line in deck_text.splitlines() if line.strip()]
        # One buffer of NUL-terminated lines and an array of pointers into it, filled in one copy: a
        # char[] for each of 100k lines cost about 70 ms, all of it before ngspice can start reading.
        data = ffi.new("char[]", "\0".join(lines).encode("utf-8"))  # cffi adds the last NUL
        raw = np.frombuffer(ffi.buffer(data), dtype=np.uint8)
        starts = np.concatenate(([0], np.flatnonzero(raw[:-1] == 0) + 1))
        pointer = np.dtype(f"u{ffi.sizeof('char *')}")
        addresses = (starts + int(ffi.cast("uintptr_t", data))).astype(pointer)
        table = ffi.new("char *[]", len(lines) + 1)  # zeroed: the last entry is the NULL ngspice stops at
        ffi.memmove(table, addresses.tobytes(), addresses.nbytes)
        self._lines = []
        rc = self._lib.ngSpice_Circ(table)
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

    def _copy(self, info) -> np.ndarray:
        ffi, length = self._ffi, info.v_length
        if info.v_compdata != ffi.NULL:
            pairs = np.frombuffer(ffi.buffer(info.v_compdata, length * 16), dtype=np.float64)
            return (pairs[0::2] + 1j * pairs[1::2]).astype(np.complex128)
        if info.v_realdata != ffi.NULL:
            return np.frombuffer(ffi.buffer(info.v_realdata, length * 8), dtype=np.float64).copy()
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
