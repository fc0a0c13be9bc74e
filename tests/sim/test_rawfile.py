"""The raw-file reader against files ngspice itself writes, checked against ngspice's own print."""

from __future__ import annotations

import re
import subprocess

import numpy as np
import pytest

from netloop.errors import SimulationError
from netloop.sim import find_ngspice_binary, read_raw

DECK = """raw round trip
v1 in 0 dc 1.5 ac 1
r1 in out 1k
c1 out 0 1u
l1 out x 1m
r2 x 0 10
.control
set numdgt=15
op
set filetype=binary
write op_bin.raw
set filetype=ascii
write op_ascii.raw
print all
save v(out) v(x) i(v1)
ac dec 4 1 1e5
set filetype=binary
write ac_bin.raw v(out) i(v1)
set filetype=ascii
write ac_ascii.raw v(out) i(v1)
set appendwrite
write ac_ascii.raw v(x)
set filetype=binary
write ac_two.raw v(out) i(v1)
write ac_two.raw v(x)
print v(out) i(v1)
.endc
.end
"""

_ROW = re.compile(r"^(\d+)\s+(\S+)\s+(\S+),\s+(\S+)\s*$")
_SCALAR = re.compile(r"^([\w()#.]+) = (\S+)$")


def _ngspice_print(tmp_path):
    (tmp_path / "deck.cir").write_text(DECK)
    out = subprocess.run([find_ngspice_binary(), "-b", "deck.cir"], cwd=tmp_path, capture_output=True, text=True, check=False).stdout  # ngspice -b exits 1 after a .control-only run
    scalars = {m.group(1).lower(): float(m.group(2)) for m in map(_SCALAR.match, out.splitlines()) if m}
    tables: dict[str, list[tuple[float, complex]]] = {}
    current = None
    for line in out.splitlines():
        if line.startswith("Index"):
            current = line.split()[2].lower()
            tables[current] = []
        elif (m := _ROW.match(line)) and current:
            tables[current].append((float(m.group(2)), complex(float(m.group(3)), float(m.group(4)))))
    return scalars, tables


@pytest.mark.ngspice
def test_raw_reader_agrees_with_ngspice_print(tmp_path):
    """Binary and ascii raw files ngspice writes read back to the values ngspice's own 'print' shows."""
    scalars, tables = _ngspice_print(tmp_path)
    assert set(tables) == {"v(out)", "i(v1)"}
    for suffix in ("bin", "ascii"):
        (op,) = read_raw(tmp_path / f"op_{suffix}.raw")
        assert op.plotname == "Operating Point" and not op.is_complex and op.title == "raw round trip"  # the deck's title line
        assert set(op.names) == {"v(in)", "v(out)", "v(x)", "i(v1)", "i(l1)"}
        for name in ("v(in)", "v(out)", "v(x)"):
            # ngspice's own op, printed with numdgt=15 ('print all' prints nodes without v())
            assert op.data[name][0] == pytest.approx(scalars[name[2:-1]], rel=1e-13, abs=1e-15)
        assert op.data["i(v1)"][0] == pytest.approx(scalars["v1#branch"], rel=1e-13)
        plots = read_raw(tmp_path / f"ac_{suffix}.raw")
        ac = plots[0]
        assert ac.plotname == "AC Analysis" and ac.is_complex
        assert ac.names == ("frequency", "v(out)", "i(v1)")
        for name in ("v(out)", "i(v1)"):
            freq, values = zip(*tables[name])
            np.testing.assert_allclose(ac.data["frequency"].real, freq, rtol=1e-14)
            np.testing.assert_allclose(ac.data[name], values, rtol=1e-13)  # ngspice 'print', 15 digits
    appended = read_raw(tmp_path / "ac_ascii.raw")
    assert len(appended) == 2 and appended[1].names == ("frequency", "v(x)")
    (binary,) = read_raw(tmp_path / "ac_bin.raw")
    np.testing.assert_allclose(binary.data["v(out)"], appended[0].data["v(out)"], rtol=1e-14)
    first, second = read_raw(tmp_path / "ac_two.raw")  # two binary plots in one file: each read to its own end
    assert first.names == ("frequency", "v(out)", "i(v1)") and second.names == ("frequency", "v(x)")
    np.testing.assert_array_equal(first.data["v(out)"], binary.data["v(out)"])
    np.testing.assert_allclose(second.data["v(x)"], appended[1].data["v(x)"], rtol=1e-14)


@pytest.mark.ngspice
def test_a_damaged_ascii_raw_file_is_refused_by_name(tmp_path):
    """A value that is no number in an ascii raw file is refused with the file, the line and the point it stands at."""
    _ngspice_print(tmp_path)
    good = (tmp_path / "op_ascii.raw").read_text()
    lines = good.splitlines()
    at = lines.index("Values:") + 1
    lines[at] = lines[at].split()[0] + "\tnot-a-number"
    bad = tmp_path / "bad.raw"
    bad.write_text("\n".join(lines) + "\n")
    with pytest.raises(SimulationError, match=rf"^{bad}: bad ascii raw value '0\\tnot-a-number' at point 0$"):
        read_raw(bad)


@pytest.mark.ngspice
def test_a_truncated_ascii_raw_file_is_refused(tmp_path):
    """An ascii raw file cut short in its values (a disk filled, a run killed while writing) is refused, not read past
    its end."""
    _ngspice_print(tmp_path)
    lines = (tmp_path / "ac_ascii.raw").read_text().splitlines()
    first_point = lines.index("Values:") + 1 + int(next(x for x in lines if x.startswith("No. Variables:")).split(":")[1])
    cut = tmp_path / "cut.raw"
    cut.write_text("\n".join(lines[:first_point]) + "\n\n\n")  # the first point whole, then blank lines to the end
    with pytest.raises(SimulationError, match=rf"^{cut}: bad ascii raw value"):
        read_raw(cut)
