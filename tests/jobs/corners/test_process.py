"""Plans a real process needs: named process corners over several .lib lines of one file, .lib lines named by section,
corners chosen by the corner word of include paths; every mistake stops the plan with its file:line."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest

from netloop.errors import PlanError
from netloop.jobs.corners import apply_settings, check_plan, expand, load_plan
from netloop.jobs.corners.apply import lib_lines
from netloop.netlist import parse_text, write_netlist

ROOT = Path(__file__).resolve().parents[3]
FAMILIES = ROOT / "circuits" / "miller_families.cir"
PROCESS = """
[process.typical]
lib.typical = "typical"
lib.res_typical = "res_typical"
lib.cap_typical = "cap_typical"

[process.slow]
lib.typical = "slow"
lib.res_typical = "res_high"
lib.cap_typical = "cap_high"
"""


def _plan(tmp_path: Path, body: str, netlist: Path = FAMILIES) -> Path:
    path = tmp_path / "plan.toml"
    path.write_text(f'netlist = "{netlist}"\nat = "out"\n' + body)
    return path


def _line_of(path: Path, text: str) -> int:
    return next(i for i, line in enumerate(path.read_text().splitlines(), 1) if text in line)


def _sections(netlist) -> list[str]:
    return [section for _, _, section, _ in lib_lines(netlist)]


def test_bundled_families_plan_switches_the_three_lib_lines_together():
    """circuits/plans/families_corners.toml: 3 process corners x 3 temperatures x 2 supplies; each corner's netlist reads
    its process corner's section on every .lib line of the one model file."""
    plan = load_plan(ROOT / "circuits" / "plans" / "families_corners.toml")
    tasks = check_plan(plan)
    assert len(tasks) == 18
    slow = next(t.corner for t in tasks if t.corner.name == "slow/125C/vdd=3.0V")
    assert slow.describe()["process"] == "slow"
    assert _sections(apply_settings(slow.netlist, slow.settings)) == ["slow", "res_high", "cap_high"]


def test_a_process_corner_gives_the_netlist_edited_by_hand(tmp_path):
    """A process corner's netlist is the netlist with its three .lib section words edited by hand (written out the same)."""
    plan = load_plan(_plan(tmp_path, PROCESS + '[axes]\nprocess = ["slow"]\n'))
    corner = expand(plan)[0]
    by_hand = FAMILIES.read_text()
    for old, new in (("typical\n", "slow\n"), ("res_typical\n", "res_high\n"), ("cap_typical\n", "cap_high\n")):
        by_hand = by_hand.replace(f"families.lib {old}", f"families.lib {new}")
    expected = parse_text(by_hand, source=str(FAMILIES), base_dir=str(FAMILIES.parent))
    assert write_netlist(apply_settings(corner.netlist, corner.settings)) == write_netlist(expected)
    assert corner.name == "slow"


def test_a_lib_line_is_named_by_its_section_as_written(tmp_path):
    """lib.res_typical names the line `.lib models/families.lib res_typical`: only that line's section changes."""
    plan = load_plan(_plan(tmp_path, '[axes]\nlib.res_typical = ["res_typical", "res_low"]\n'))
    corners = expand(plan)
    assert _sections(apply_settings(corners[1].netlist, corners[1].settings)) == ["typical", "res_low", "cap_typical"]


def test_several_lib_lines_of_one_file_lead_to_process_corners_not_a_dead_end(tmp_path):
    """lib."families.lib" on a netlist that reads the file on three lines says so, lists each line's section and line, and
    shows how to name a line by its section and switch them together with a process corner (at the plan's line)."""
    path = _plan(tmp_path, '[axes]\nlib."families.lib" = ["typical", "slow"]\n')
    with pytest.raises(PlanError) as info:
        check_plan(load_plan(path))
    message = str(info.value)
    assert message.startswith(f"{path}:{_line_of(path, 'families.lib')}:")
    assert "3 .lib lines read 'families.lib'" in message
    assert "typical (line 17), res_typical (line 18), cap_typical (line 19)" in message
    assert "lib.typical = ..." in message and "[process.NAME]" in message and "process = [" in message


@pytest.mark.parametrize(("body", "where", "says"), [
    ('[axes]\nprocess = ["typical", "fast"]\n', 'process = ["typical"', "no process corner named 'fast'"),
    ('[process.odd]\ntemp = 80\n[axes]\nprocess = ["odd"]\n', "temp = 80", "a process corner sets lib and include only"),
    ('[process.odd]\nlib.typical = "typical"\n[process]\neven = { temp = 80 }\n[axes]\nprocess = ["even"]\n', "even = {", "a process corner sets lib and include only"),
    ('[[corner]]\nprocess = "slow"\nlib.typical = "fast"\n', 'lib.typical = "fast"', "set both by process corner 'slow'"),
    ('[process.typical]\nlib.typical = "typical"\n[process.slow]\nlib.mos = "slow"\n[axes]\nprocess = ["typical", "slow"]\n',
     'lib.mos = "slow"', "no .lib line reads a file ending in 'mos' or has the section 'mos'"),
    ("share_loads = 1\n", "share_loads", "share_loads must be true or false"),
], ids=["unknown-process", "process-sets-temp", "inline-process-sets-temp", "process-and-corner-set-one-line", "unknown-line-in-a-process", "share-loads-not-bool"])
def test_process_mistakes_stop_the_plan_at_their_line(tmp_path, body, where, says):
    """Each mistake in process corners is a PlanError at the plan line that made it, before anything runs."""
    top = body if body.startswith("share_loads") else ""
    path = _plan(tmp_path, top + (PROCESS if "[process." not in body else "") + body.removeprefix(top))
    with pytest.raises(PlanError) as info:
        check_plan(load_plan(path))
    line = _line_of(path, where) if "corner" not in says or "set both" not in says else _line_of(path, "[[corner]]")
    assert str(info.value).startswith(f"{path}:{line}:"), str(info.value)
    assert says in str(info.value)


@pytest.fixture
def release(tmp_path):
    """An invented process release with one model file per corner (models_tt.lib, models/ss/...), and a netlist that
    includes the typical ones directly."""
    cards = (ROOT / "circuits" / "models" / "corners.lib").read_text()
    for corner in ("tt", "ss", "ff"):
        body = re.search(rf"^\.lib {corner}\n(.*?)^\.endl", cards, flags=re.MULTILINE | re.DOTALL)[1]
        nch, pch = body.split(".model pch")
        (tmp_path / "pdk" / corner).mkdir(parents=True)
        (tmp_path / "pdk" / f"nmos_{corner}.corner.spice").write_text(f"* INVENTED (corners.lib {corner})\n{nch}")
        (tmp_path / "pdk" / corner / "pmos.spice").write_text(f"* INVENTED (corners.lib {corner})\n.model pch{pch}")
    text = (ROOT / "circuits" / "miller_buffer.cir").read_text().replace(
        ".lib models/corners.lib tt", '.include "pdk/nmos_tt.corner.spice"\n.include pdk/tt/pmos.spice')
    (tmp_path / "amp.cir").write_text(text)
    return tmp_path


def test_include_corner_word_swaps_every_include_path_that_holds_it(release):
    """include.tt = ["tt", "ss"]: the ss corner reads pdk/nmos_ss.corner.spice and pdk/ss/pmos.spice, exactly the netlist
    edited by hand; tt reads the netlist's own files."""
    plan = load_plan(_plan(release, '[axes]\ninclude.tt = ["tt", "ss"]\n', netlist=release / "amp.cir"))
    tt, ss = (apply_settings(c.netlist, c.settings) for c in expand(plan))
    text = (release / "amp.cir").read_text().replace("nmos_tt", "nmos_ss").replace("pdk/tt/", "pdk/ss/")
    by_hand = parse_text(text, source=str(release / "amp.cir"), base_dir=str(release))
    assert write_netlist(ss) == write_netlist(by_hand)
    assert write_netlist(tt) == write_netlist(parse_text((release / "amp.cir").read_text(), source=str(release / "amp.cir"),
                                                         base_dir=str(release)))
    assert [c.name for c in expand(plan)] == ["tt", "ss"]


def test_include_corner_word_mistakes_stop_the_plan_at_their_line(release):
    """A swapped file that does not exist names the netlist line and the path it would read; a word no include path holds
    says which files the netlist includes; both at the plan's axis line."""
    path = _plan(release, '[axes]\ninclude.tt = ["tt", "sf"]\n', netlist=release / "amp.cir")
    with pytest.raises(PlanError) as info:
        check_plan(load_plan(path))
    assert str(info.value).startswith(f"{path}:{_line_of(path, 'include.tt')}: corner 'sf': {release / 'amp.cir'}:")
    assert "would read 'pdk/nmos_sf.corner.spice', which does not exist" in str(info.value)
    path = _plan(release, '[axes]\ninclude.typ = ["ss"]\n', netlist=release / "amp.cir")
    with pytest.raises(PlanError) as info:
        check_plan(load_plan(path))
    assert str(info.value).startswith(f"{path}:{_line_of(path, 'include.typ')}:")
    assert "no .include or .lib path of its own holds the corner word 'typ'" in str(info.value)
    assert "nmos_tt.corner.spice" in str(info.value)


def test_bundled_sky130_plan_reads_each_section_of_the_process():
    """circuits/plans/sky130_ldo_corners.toml: 3 sections x 3 temperatures x 2 supplies of the sky130 regulator; the ss
    corners read process.spice's ss section."""
    plan = load_plan(ROOT / "circuits" / "plans" / "sky130_ldo_corners.toml")
    tasks = check_plan(plan)
    assert len(tasks) == 18
    ss = next(t.corner for t in tasks if t.corner.name == "ss/27C/vsup=1.7V")
    assert _sections(apply_settings(ss.netlist, ss.settings)) == ["ss"]


def test_plans_never_write_the_users_files(release):
    """Applying every corner of an include plan leaves the netlist and the model files as they were."""
    before = {p: p.read_bytes() for p in release.rglob("*") if p.is_file()}
    plan = load_plan(_plan(release, '[axes]\ninclude.tt = ["tt", "ss", "ff"]\ntemp = [0, 50]\n', netlist=release / "amp.cir"))
    check_plan(plan)
    shutil.copy(release / "amp.cir", release / "copy.cir")
    assert {p: p.read_bytes() for p in before} == before


def test_process_corner_mistakes_name_the_line_of_the_process_table(tmp_path):
    """A process corner that sets nothing is refused at its [process.NAME] line, a corner setting a .lib line its process
    corner sets names that table's line, and a process key that is not a table is refused at its own line (word for word)."""
    path = _plan(tmp_path, PROCESS + '\n[process.empty]\n[axes]\nprocess = ["empty"]\n')
    with pytest.raises(PlanError) as info:
        load_plan(path)
    assert str(info.value) == f"{path}:{_line_of(path, '[process.empty]')}: process corner 'empty' sets nothing; give it lib.LINE = \"SECTION\" keys"
    path = _plan(tmp_path, PROCESS + '\n[[corner]]\nprocess = "slow"\nlib.typical = "fast"\n')
    with pytest.raises(PlanError, match=rf"set both by process corner 'slow' \(line {_line_of(path, '[process.slow]')}\)"):
        check_plan(load_plan(path))
    path = _plan(tmp_path, 'process = "slow"\n')
    with pytest.raises(PlanError) as info:
        load_plan(path)
    assert str(info.value) == (f"{path}:{_line_of(path, 'process =')}: process corners are tables: [process.NAME] with "
                               'lib.LINE = "SECTION" (and include.WORD = "WORD") keys')
