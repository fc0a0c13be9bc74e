"""Read ngspice raw files (binary and ascii) into plain numpy arrays, one record per plot."""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from netloop.errors import SimulationError

__all__ = ["RawPlot", "read_raw"]


@dataclass(frozen=True, slots=True)
class RawPlot:
    """One plot of a raw file: its name, the variables in file order and their data."""

    title: str
    plotname: str
    flags: tuple[str, ...]
    names: tuple[str, ...]  # lower-case, as ngspice wrote them: "frequency", "v(out)", "i(v1)"
    types: tuple[str, ...]  # "frequency", "voltage", "current", ...
    data: dict[str, np.ndarray]  # name -> float64 or complex128 array of No. Points values

    @property
    def is_complex(self) -> bool:
        return "complex" in self.flags


_HEADER = re.compile(rb"^([A-Za-z. ]+):\s?(.*)$")


def read_raw(path: str | Path) -> tuple[RawPlot, ...]:
    """Every plot in the raw file at ``path``, in file order."""
    path = Path(path)
    blob = path.read_bytes()
    plots = []
    pos = 0
    while pos < len(blob):
        if blob[pos:pos + 1] in (b"\n", b"\r", b" ", b"\t"):
            pos += 1
            continue
        plot, pos = _read_plot(blob, pos, path)
        plots.append(plot)
    return tuple(plots)


def _read_line(blob: bytes, pos: int) -> tuple[bytes, int]:
    end = blob.find(b"\n", pos)
    if end < 0:
        return blob[pos:], len(blob)
    return blob[pos:end].rstrip(b"\r"), end + 1


def _read_plot(blob: bytes, pos: int, path: Path) -> tuple[RawPlot, int]:
    header: dict[str, str] = {}
    while True:
        if pos >= len(blob):
            raise SimulationError(f"{path}: raw file ends inside a header")
        line, pos = _read_line(blob, pos)
        match = _HEADER.match(line)
        if match is None:
            raise SimulationError(f"{path}: unexpected raw header line {line[:80]!r}")
        key = match.group(1).decode().strip().lower()
        if key == "variables":
            break
        header[key] = match.group(2).decode(errors="replace").strip()
    try:
        nvars = int(header["no. variables"])
        npoints = int(header["no. points"])
    except (KeyError, ValueError) as exc:
        raise SimulationError(f"{path}: raw header lacks 'No. Variables'/'No. Points'") from exc
    flags = tuple(header.get("flags", "real").lower().split())
    names, types = [], []
    for _ in range(nvars):
        line, pos = _read_line(blob, pos)
        fields = line.decode(errors="replace").split()
        if len(fields) < 3:
            raise SimulationError(f"{path}: bad raw variable line {line!r}")
        names.append(fields[1].lower())
        types.append(fields[2].lower())
    line, pos = _read_line(blob, pos)
    kind = line.strip().lower()
    is_complex = "complex" in flags
    if kind == b"binary:":
        width = 2 if is_complex else 1
        count = npoints * nvars * width
        nbytes = count * 8
        if pos + nbytes > len(blob):
            raise SimulationError(f"{path}: binary raw data is truncated ({len(blob) - pos} of {nbytes} bytes)")
        flat = np.frombuffer(blob, dtype="<f8", count=count, offset=pos).reshape(npoints, nvars, width)
        pos += nbytes
        if is_complex:
            table = flat[:, :, 0] + 1j * flat[:, :, 1]
        else:
            table = flat[:, :, 0].copy()
    elif kind == b"values:":
        table, pos = _read_ascii(blob, pos, npoints, nvars, is_complex, path)
    else:
        raise SimulationError(f"{path}: expected 'Binary:' or 'Values:', found {line[:40]!r}")
    data = {name: np.ascontiguousarray(table[:, i]) for i, name in enumerate(names)}
    return (
        RawPlot(
            title=header.get("title", ""),
            plotname=header.get("plotname", ""),
            flags=flags,
            names=tuple(names),
            types=tuple(types),
            data=data,
        ),
        pos,
    )


def _read_ascii(blob: bytes, pos: int, npoints: int, nvars: int, is_complex: bool, path: Path):
    dtype = complex if is_complex else float
    table = np.zeros((npoints, nvars), dtype=dtype)
    for point in range(npoints):
        for var in range(nvars):
            line, pos = _read_line(blob, pos)
            while not line.strip() and pos < len(blob):
                line, pos = _read_line(blob, pos)
            fields = line.split()
            if var == 0:
                fields = fields[1:]  # the point index comes first
            text = b"".join(fields).decode()
            try:
                if is_complex:
                    re_text, _, im_text = text.partition(",")
                    table[point, var] = complex(float(re_text), float(im_text))
                else:
                    table[point, var] = float(text)
            except ValueError as exc:
                raise SimulationError(f"{path}: bad ascii raw value {line.decode(errors='replace').strip()!r} at point {point}") from exc
    return table, pos
