"""A corner's netlist: each setting kind gives what a designer gets by editing a copy of the netlist by hand."""

from __future__ import annotations

import pytest

from netloop.jobs.corners import Setting, apply_settings
from netloop.jobs.corners.apply import CornerApplyError
from netloop.netlist import SourceLocation, parse_text, write_netlist


def _both(tmp_path, text: str, settings: tuple[Setting, ...], edit) -> tuple[str, str]:
    """The corner's netlist and the hand-edited copy (``edit`` applied to the text), both written out."""
    src = tmp_path / "c.cir"
    src.write_text(text)
    ours = apply_settings(str(src), settings)
    hand = parse_text(edit(text), source=str(src), base_dir=str(tmp_path))  # reference: the same change made by hand
    return write_netlist(ours), write_netlist(hand)


@pytest.mark.parametrize("value,written", [("2.5", "2.5"), ("vdd*0.9", "{vdd*0.9}"), ("{k+1}", "{k+1}"),
                                           ("2*VMAX", "{2*VMAX}"), ("{X0-1}", "{X0-1}")])  # only the braces go, not an X
def test_param_value_replaces_a_whole_group(tmp_path, value, written):
    """The old value goes whole (a {...} group with spaces, a quoted text), the others stay; an expression is written in braces."""
    text = "t\n.param a = {b * 2}, c='x y' d=1\n.param A=3\nR1 n 0 {a}\n.end\n"
    ours, hand = _both(tmp_path, text, (Setting("param", "a", value),),
                       lambda t: t.replace("a = {b * 2}", f"a = {written}").replace("A=3", f"A={written}"))
    assert ours == hand


def test_temperature_setting_drops_every_other_temperature(tmp_path):
    """.temp lines go, and temp= leaves .options/.opt lines (other options stay); one .temp with the corner's value is added."""
    text = "t\n.temp 60\n.options TEMP = 50 reltol=1e-4\n.opt temp=40\n.option gmin=1e-12\nR1 n 0 1k\n.end\n"
    src = tmp_path / "c.cir"
    src.write_text(text)
    nl = apply_settings(str(src), (Setting("temp", "", "-40"),))
    assert [d.text for d in nl.directives] == [".options reltol=1e-4", ".opt", ".option gmin=1e-12", ".temp -40"]
    assert nl.directives[-1].location.file == "<corner>"


def test_seed_setting_puts_the_seed_option_first(tmp_path):
    """A seed setting gives the netlist edited by hand with ``.option seed=N`` as its first statement, ahead of the
    netlist's own seed (ngspice takes the first seed it reads), at the corner's location (the plan line when given)."""
    text = "t\n.option seed=1 reltol=1e-4\nR1 n 0 1k\n.end\n"
    ours, hand = _both(tmp_path, text, (Setting("seed", "", "7"),), lambda t: t.replace(".option seed=1", ".option seed=7\n.option seed=1"))
    assert ours == hand
    src = tmp_path / "c.cir"
    reference = parse_text(text.replace(".option seed=1", ".option seed=7\n.option seed=1"), source=str(src), base_dir=str(tmp_path))
    for origin in (None, SourceLocation(str(tmp_path / "plan.toml"), 12)):
        nl = apply_settings(str(src), (Setting("seed", "", "7"), Setting("temp", "", "50")), origin=origin)
        assert [(d.keyword, d.text) for d in nl.directives] == [(d.keyword, d.text) for d in reference.directives] + [(".temp", ".temp 50")]
        assert nl.directives[0].location == (origin or SourceLocation("<corner>", 1))


def test_supply_setting_needs_a_voltage_source(tmp_path):
    """A supply setting naming a resistor, or a source the netlist lacks, is refused with the element's place and the setting."""
    src = tmp_path / "c.cir"
    src.write_text("t\nRvdd vdd 0 1k\nV1 vdd 0 dc 1\n.end\n")
    bad = Setting("supply", "rvdd", "2.5")
    with pytest.raises(CornerApplyError) as info:
        apply_settings(str(src), (bad,))
    assert str(info.value) == f"{src}:2:1: Rvdd is not a voltage source; a supply setting needs a V element" and info.value.setting is bad
    with pytest.raises(CornerApplyError, match=r"has no top-level voltage source 'V9'"):
        apply_settings(str(src), (Setting("supply", "V9", "2.5"),))
    with pytest.raises(CornerApplyError, match=r"has no top-level '\.param k=\.\.\.' to change"):
        apply_settings(str(src), (Setting("param", "k", "2"),))


def test_element_setting_replaces_the_value_after_the_nodes(tmp_path):
    """element.NAME gives an R, C or L card the new value in place of the one after its nodes (a {...} group too), its
    other words kept: the copy a designer edits by hand."""
    text = "t\n.param c0=1p\nR1 a b 10k tc1=1e-3\nC1 b 0 {2*c0}\nL1 a 0 1u ic=0\nV1 a 0 dc 1\n.end\n"
    settings = (Setting("element", "r1", "4.7k"), Setting("element", "c1", "3p"), Setting("element", "l1", "2.2u"))
    ours, hand = _both(tmp_path, text, settings, lambda t: t.replace("10k tc1", "4.7k tc1").replace("{2*c0}", "3p").replace("1u ic", "2.2u ic"))
    assert ours == hand
    src = tmp_path / "c.cir"
    bad = Setting("element", "v1", "2")
    with pytest.raises(CornerApplyError) as info:
        apply_settings(str(src), (bad,))
    assert str(info.value).startswith(f"{src}:6:1: V1 is not a resistor, capacitor or inductor") and info.value.setting is bad
    src.write_text("t\nR1 a 0 r=10k\n.end\n")
    with pytest.raises(CornerApplyError, match=r"R1 is not a resistor, capacitor or inductor with its value after its nodes"):
        apply_settings(str(src), (Setting("element", "r1", "1k"),))


def test_library_line_chosen_by_file_or_section(tmp_path):
    """With two .lib lines, lib.FILE or lib.SECTION picks one; no name, or a name matching neither, is refused listing the lines."""
    (tmp_path / "n.lib").write_text(".lib tt\n.param kn=1\n.endl\n.lib ss\n.param kn=2\n.endl\n")
    (tmp_path / "p.lib").write_text(".lib ptt\n.param kp=1\n.endl\n.lib pss\n.param kp=2\n.endl\n")
    text = "t\n.lib n.lib tt\n.lib 'p.lib' ptt\nR1 a 0 {kn+kp}\n.end\n"
    for setting, edit in ((Setting("lib", "n.lib", "ss"), (".lib n.lib tt", ".lib n.lib ss")),
                          (Setting("lib", "ptt", "pss"), (".lib 'p.lib' ptt", ".lib 'p.lib' pss"))):
        ours, hand = _both(tmp_path, text, (setting,), lambda t, e=edit: t.replace(*e))
        assert ours == hand
    src = tmp_path / "c.cir"
    with pytest.raises(CornerApplyError, match=r"has several \.lib lines \(n\.lib tt \(line 2\), p\.lib ptt \(line 3\)\)"):
        apply_settings(str(src), (Setting("lib", "", "ss"),))
    with pytest.raises(CornerApplyError, match=r"no \.lib line reads a file ending in 'x\.lib' or has the section 'x\.lib'"):
        apply_settings(str(src), (Setting("lib", "x.lib", "ss"),))
    src.write_text("t\nR1 a 0 1k\n.end\n")
    with pytest.raises(CornerApplyError, match=r"c\.cir has no '\.lib FILE SECTION' line of its own to change"):
        apply_settings(str(src), (Setting("lib", "", "ss"),))


LIBS = "t\n.lib models/n.lib tt\n.lib models/fam.lib rtt\n.lib \"models/fam.lib\" tt\n.lib 'models\\p.lib' ptt\nR1 a 0 {kn+kr+kc+kp}\n.end\n"
LISTED = "n.lib tt (line 2), fam.lib rtt (line 3), fam.lib tt (line 4), models\\p.lib ptt (line 5)"


@pytest.mark.parametrize("target,edit,message", [
    ("RTT", (".lib models/fam.lib rtt", ".lib models/fam.lib rss"), None),  # a section, any case
    # a path written with backslashes (a netlist from Windows; here a file named so) is found by either separator
    ("models/p.lib", ("'models\\p.lib' ptt", "'models\\p.lib' pss"), None),
    ("models\\p.lib", ("'models\\p.lib' ptt", "'models\\p.lib' pss"), None),
    ("", None, f"{{src}} has several .lib lines ({LISTED}); name the one to change, by its section as written (lib.tt = ...) or its "
               "file (lib.\"n.lib\" = ...), or switch them together with a process corner ([process.NAME], see the README)"),
    ("fam.lib", None, "{src}: 2 .lib lines read 'fam.lib', one per device family: rtt (line 3), tt (line 4); name each by its section as "
                      "written, e.g. lib.rtt = ..., and switch them together with a process corner: [process.NAME] with lib.rtt = \"...\" and "
                      "the others, then process = [\"NAME\", ...] in [axes] (see the README)"),
    ("zz", None, f"{{src}}: no .lib line reads a file ending in 'zz' or has the section 'zz' (its .lib lines: {LISTED})"),
    ("tt", None, f"{{src}}: more than one .lib line reads a file ending in 'tt' or has the section 'tt' (its .lib lines: {LISTED})"),
])
def test_library_line_named_by_file_section_or_windows_path(tmp_path, target, edit, message):
    """A lib setting changes the one .lib line its target names (the netlist edited by hand), by a section in any case or a
    file path with either separator; a target naming none, several, or one file read by several lines is refused with the
    message, word for word, that lists the lines and says how to name one."""
    (tmp_path / "models").mkdir()
    (tmp_path / "models" / "n.lib").write_text(".lib tt\n.param kn=1\n.endl\n.lib ss\n.param kn=2\n.endl\n")
    (tmp_path / "models" / "fam.lib").write_text(".lib tt\n.param kc=1\n.endl\n.lib rtt\n.param kr=1\n.endl\n.lib rss\n.param kr=2\n.endl\n")
    (tmp_path / "models\\p.lib").write_text(".lib ptt\n.param kp=1\n.endl\n.lib pss\n.param kp=2\n.endl\n")
    setting = Setting("lib", target, edit[1].split()[-1] if edit else "ss")
    if message is None:
        ours, hand = _both(tmp_path, LIBS, (setting,), lambda t: t.replace(*edit))
        assert ours == hand
        return
    (tmp_path / "c.cir").write_text(LIBS)
    with pytest.raises(CornerApplyError) as info:
        apply_settings(str(tmp_path / "c.cir"), (setting,))
    assert str(info.value) == message.format(src=tmp_path / "c.cir")


def test_include_word_no_path_holds_is_refused_naming_the_setting(tmp_path):
    """An include corner word on a netlist that includes nothing is refused word for word ("its include files: none") and
    the error carries the setting, so the plan can point at its line."""
    src = tmp_path / "c.cir"
    src.write_text("t\nR1 a 0 1k\n.end\n")
    bad = Setting("include", "tt", "ss")
    with pytest.raises(CornerApplyError) as info:
        apply_settings(str(src), (bad,))
    assert str(info.value) == (f"{src}: no .include or .lib path of its own holds the corner word 'tt' (as a word of its own, "
                               "e.g. .../tt/... or ..._tt.spice; its include files: none)") and info.value.setting is bad


def test_lib_setting_reads_a_netlist_that_is_not_utf8(tmp_path):
    """A netlist with a Latin-1 byte in a comment takes a lib setting as the netlist reader reads it (the byte replaced):
    the result is the hand-edited file read by parse_file."""
    from netloop.netlist import parse_file

    (tmp_path / "m.lib").write_text(".lib tt\n.param k=1\n.endl\n.lib ss\n.param k=2\n.endl\n")
    text = "t\n* 10 \xb5A bias (Latin-1)\n.lib m.lib tt\nR1 a 0 {k}\n.end\n"
    (tmp_path / "c.cir").write_bytes(text.encode("latin-1"))
    (tmp_path / "hand.cir").write_bytes(text.replace("m.lib tt", "m.lib ss").encode("latin-1"))
    ours = apply_settings(str(tmp_path / "c.cir"), (Setting("lib", "", "ss"),))
    assert write_netlist(ours) == write_netlist(parse_file(str(tmp_path / "hand.cir"))).replace("hand.cir", "c.cir")


def test_worker_reads_a_corner_once_until_a_file_it_read_changes(tmp_path, monkeypatch):
    """corner_netlist gives what apply_settings gives for every sample of a corner (the reference: the uncached path),
    reads the files once for all of them, reads them again when an included library changes (its size and
    modification time, as os.stat reports them), and reads only the section for another section."""
    from netloop.jobs.corners import worker
    from netloop.jobs.corners.expand import Corner

    (tmp_path / "lib.inc").write_text(".lib typ\n.param k=1\n.endl typ\n.lib hot\n.param k=2\n.endl hot\n")
    (tmp_path / "c.cir").write_text("t\n.lib lib.inc typ\nR1 n 0 {1k*k}\nV1 n 0 dc 1\n.end\n")
    monkeypatch.setattr(worker, "_READ", {})
    reads = []  # "written": the netlist as written parsed; "section": the .lib line's section read again
    real, parse = worker.apply_settings, worker.parse_file
    monkeypatch.setattr(worker, "parse_file", lambda path: reads.append("written") or parse(path))
    monkeypatch.setattr(worker, "apply_settings", lambda nl, s: reads.extend(["section"] * any(x.kind == "lib" for x in s)) or real(nl, s))

    def sample(seed: int, section: str = "hot") -> Corner:
        return Corner(f"{section}#{seed}", str(tmp_path / "c.cir"), (Setting("lib", "lib.inc", section), Setting("temp", "", "85"),
                                                                     Setting("seed", "", str(seed))), 1)

    def same(seed: int, section: str = "hot") -> tuple:
        ours, reference = worker.corner_netlist(sample(seed, section)), real(sample(seed).netlist, sample(seed, section).settings)
        assert ours.statements == reference.statements and write_netlist(ours) == write_netlist(reference)
        return tuple(getattr(s, "text", "") for s in ours.statements)

    for seed in (1, 2, 3):
        assert ".option seed=%d" % seed in same(seed) and ".param k=2" in same(seed)
    assert reads == ["written", "section"]  # the files read once, for the first sample
    (tmp_path / "lib.inc").write_text(".lib typ\n.param k=1\n.endl typ\n.lib hot\n.param k=3.5\n.endl hot\n")
    assert ".param k=3.5" in same(4) and reads == ["written", "section"] * 2
    assert ".param k=1" in same(5, "typ") and reads == ["written", "section"] * 2 + ["section"]  # another section: from the same parse
