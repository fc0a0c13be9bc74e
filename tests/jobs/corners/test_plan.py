"""Corner plans: reading, errors with the plan's file:line, expansion into corners, and the netlist a corner gets."""

from __future__ import annotations

import hashlib
import itertools
import shutil
from pathlib import Path

import pytest

from netloop.jobs.corners import Setting, apply_settings, check_plan, expand, load_plan, parse_plan, tasks_of
from netloop.errors import PlanError
from netloop.netlist import parse_file, parse_text, write_netlist

ROOT = Path(__file__).resolve().parents[3]
MILLER = ROOT / "circuits" / "miller_buffer.cir"
LIB = ROOT / "circuits" / "models" / "corners.lib"


def _plan(tmp_path: Path, body: str, name: str = "plan.toml") -> Path:
    path = tmp_path / name
    path.write_text(f'netlist = "{MILLER}"\nat = "out"\n' + body)
    return path


def test_bundled_example_plan_reads_and_every_corner_applies():
    """circuits/plans/miller_corners.toml is valid: 3 x 3 x 2 product corners plus 2 explicit ones, all applicable to the netlist."""
    plan = load_plan(ROOT / "circuits" / "plans" / "miller_corners.toml")
    tasks = check_plan(plan)
    assert len(tasks) == 3 * 3 * 2 + 2
    assert [t.corner.name for t in tasks][-2:] == ["slow-hot-small-cc", "fast-cold-low-supply"]


def test_bundled_readout_plan_measures_each_corner_at_both_channels():
    """circuits/plans/readout_corners.toml: four explicit corners of the hierarchical readout, each at out1 and fb2."""
    plan = load_plan(ROOT / "circuits" / "plans" / "readout_corners.toml")
    tasks = check_plan(plan)
    assert [(t.corner.name, t.at) for t in tasks][:2] == [("typical", "out1"), ("typical", "fb2")]
    assert len(tasks) == 8


def test_auto_without_loop_discovery_is_refused_at_the_at_line(tmp_path, monkeypatch):
    """at = "auto" on an installation without netloop.jobs.discover (its import made to fail) is a PlanError at the plan's
    at line saying so, before any corner is applied."""
    import sys

    monkeypatch.setitem(sys.modules, "netloop.jobs.discover", None)  # import raises ImportError, as when it is missing
    path = tmp_path / "plan.toml"
    path.write_text(f'netlist = "{MILLER}"\n\nat = "auto"\n')
    with pytest.raises(PlanError) as info:
        check_plan(load_plan(path))
    assert str(info.value) == f"{path}:3: at = \"auto\" needs netloop's loop discovery, which this installation lacks; name the break nodes"


@pytest.mark.parametrize("at", ['[" "]', "[5]", "[]", '"out" # fine', '["out", "auto"]'])
def test_at_must_name_nodes(tmp_path, at):
    """at must be a node, a list of nodes, or "auto" alone: a blank or non-text entry, an empty list, or auto among nodes
    is refused word for word at the at line."""
    path = tmp_path / "plan.toml"
    path.write_text(f'netlist = "{MILLER}"\nat = {at}\n')
    if at.endswith("# fine"):
        assert load_plan(path).at == ("out",)
        return
    with pytest.raises(PlanError) as info:
        load_plan(path)
    said = '"auto" measures every loop; do not list nodes with it' if "auto" in at else 'at must be a node name, a list of node names, or "auto"'
    assert str(info.value) == f"{path}:2: {said}"


RHP = "open_loop_rhp_poles must be a whole number 0 or more"
TIMEOUT = "timeout_s must be a positive number of seconds"


@pytest.mark.parametrize("option,said", [
    ("open_loop_rhp_poles = -1", RHP), ("open_loop_rhp_poles = true", RHP), ("open_loop_rhp_poles = 1.5", RHP),
    ("timeout_s = 0", TIMEOUT), ("timeout_s = true", TIMEOUT), ('timeout_s = "60"', TIMEOUT),
    ("driver = 5", 'driver must be text such as "m6.d"'), ('share_loads = "yes"', "share_loads must be true or false"),
    ("axes = 5", "axes must be a table ([axes])"), ("corner = 5", "corners are tables written [[corner]]"),
    ("corner = [5]", "corners are tables written [[corner]]"), ("units = 5", 'units must be a table of texts, e.g. [units] iload = "A"'),
])
def test_top_level_options_of_the_wrong_kind_are_refused_at_their_line(tmp_path, option, said):
    """open_loop_rhp_poles (P of the Nyquist criterion) must be a whole number 0 or more, timeout_s a positive number,
    driver a text, share_loads true or false, axes, corner and units tables: anything else is refused word for word at its line."""
    path = tmp_path / "plan.toml"
    path.write_text(f'netlist = "{MILLER}"\nat = "out"\n{option}\n')
    with pytest.raises(PlanError) as info:
        load_plan(path)
    assert str(info.value) == f"{path}:3: {said}"


def test_plan_without_axes_or_corners_is_the_nominal_corner(tmp_path):
    """A plan with neither [axes] nor [[corner]] has one corner, "nominal": the netlist as written (README, corner plans)."""
    plan = load_plan(_plan(tmp_path, ""))
    (corner,) = expand(plan)
    assert (corner.name, corner.netlist, corner.settings, corner.describe()) == ("nominal", plan.netlist, (), {})
    (task,) = tasks_of(plan, (corner,))
    assert (task.corner, task.at) == (corner, "out")


def test_netlist_axis_reads_each_netlist_beside_the_plan(tmp_path):
    """A netlist axis gives one corner per netlist, each path taken relative to the plan's folder (as the top-level
    netlist is), and the corner's netlist is that file."""
    (tmp_path / "variants").mkdir()
    for name in ("a.cir", "b.cir"):
        shutil.copy(MILLER, tmp_path / "variants" / name)
    plan = load_plan(_plan(tmp_path, '[axes]\nnetlist = ["variants/a.cir", "variants/b.cir"]\n'))
    assert [c.netlist for c in expand(plan)] == [str(tmp_path / "variants" / "a.cir"), str(tmp_path / "variants" / "b.cir")]


def test_product_is_every_combination_in_axis_order(tmp_path):
    """The product holds each combination once (itertools.product is the reference), last axis fastest, names from the values."""
    plan = load_plan(_plan(tmp_path, '[axes]\nlib = ["tt", "ss"]\ntemp = [-40, 27, 125]\nsupply.vdd = [3.0, 3.6]\n'))
    corners = expand(plan)
    want = list(itertools.product(["tt", "ss"], ["-40", "27", "125"], ["3.0", "3.6"]))
    got = [(c.describe()["lib"], c.describe()["temp"], c.describe()["supply.vdd"]) for c in corners]
    assert got == want
    assert corners[0].name == "tt/-40C/vdd=3.0V"
    assert len({t.key for t in tasks_of(plan, corners)}) == len(want)


def test_explicit_list_follows_the_product_and_names_must_differ(tmp_path):
    """[[corner]] tables run after the product; two corners with one name are a PlanError at the second table's line."""
    text = '[axes]\nlib = ["tt"]\n\n[[corner]]\nname = "a"\nlib = "ss"\n\n[[corner]]\nname = "a"\ntemp = 80\n'
    plan = load_plan(_plan(tmp_path, text))
    with pytest.raises(PlanError) as info:
        expand(plan)
    lines = (tmp_path / "plan.toml").read_text().splitlines()
    second = [i + 1 for i, line in enumerate(lines) if line == "[[corner]]"][1]
    assert f"plan.toml:{second}:" in str(info.value)


@pytest.mark.parametrize("text,line", [("netlist =", 1), ('netlist = "a.cir"\nat =', 2), ('netlist = "a.cir"\nat =\n', 2)])
def test_a_plan_cut_short_is_refused_at_its_last_line(text, line):
    """tomllib says only "at end of document" for a value cut short; the error names the plan's last line (counted by hand)."""
    with pytest.raises(PlanError, match=rf"^<string>:{line}: not valid TOML"):
        parse_plan(text)


def test_toml_syntax_error_carries_the_line(tmp_path):
    """A TOML syntax error is a PlanError naming the plan file and the line tomllib reports, once: tomllib's own
    "(at line L, column C)" is not repeated after it."""
    path = _plan(tmp_path, "[axes]\nlib = [\"tt\", \"ss\"\ntemp = 3\n")
    with pytest.raises(PlanError, match=r"plan\.toml:\d+: not valid TOML") as info:
        load_plan(path)
    assert "(at line" not in str(info.value)
    # tomllib's own words follow, then the column it gives (Python's tomllib, 3.11: "Invalid value")
    with pytest.raises(PlanError) as info:
        parse_plan('netlist = "a.cir"\nat == "out"\n', "p.toml")
    assert str(info.value) == "p.toml:2: not valid TOML: Invalid value, column 5"


@pytest.mark.parametrize(
    ("body", "key", "expected"),
    [
        ('[axes]\ncolour = ["red"]\n', "colour", "unknown setting"),
        ('require = ["pm >> 60"]\n', "require", "cannot read requirement"),
        ('require = ["fc >= 100M"]\n', "require", "write 100meg or 100MHz for mega"),
        ('[sweep]\nfmax_hz = "100M"\n', "fmax_hz", "write 100meg or 100MHz for mega"),
        ('method = "guess"\n', "method", "method must be one of"),
        ('[axes]\ntemp = ["hot"]\n', "temp", "must be a number"),
        ('[axes]\nparam = ["1p"]\n', "param", "needs a name"),
        ('[axes]\nelement = ["1p"]\n', "element", r"needs a name, e\.g\. element\.cl"),
        ('[[corner]]\nelement = "1p"\n', "element", r'needs a name, e\.g\. element\.cl = "3p"$'),  # one corner: one value
        ('[axes]\nelement.cl = ["big"]\n', "element.cl", "must be a number"),
        ('[[corner]]\nlib = ["tt", "ss"]\n', "lib", "takes one value"),
        ('[[corner]]\nlib = []\n', "lib", r"lib takes one value in a \[\[corner\]\]; lists belong in \[axes\]$"),
        ('[axes]\nlib = ["tt", "  "]\n', "lib", "lib is empty$"),
        ('[axes]\nlib = ["tt", true]\n', "lib", "lib must be a number or a string, got True$"),  # TOML's true
        ('[axes]\ntemp = [27, inf]\n', "temp", "temp must be finite, got inf$"),  # TOML's inf
        ('[axes]\nsupply.vdd = ["3.3", "1e999"]\n', "supply.vdd", "supply.vdd must be finite, got '1e999'$"),  # beyond a double
        ('[axes]\ntemp = {x = 1}\n', "temp", "temp must be a list of values, not a table$"),
        ('[[corner]]\ntemp = {x = 1}\n', "temp", "temp must be a value, not a table$"),
        ('[axes]\nparam.k = ["1", " "]\n', "param", "param.k is empty$"),
        ('sweep = 5\n', "sweep", r"sweep must be a table \(\[sweep\]\)$"),
        ('[sweep]\nfmin_hz = 1e6\nfmax_hz = 1\n', "[sweep]", "the sweep needs 0 < fmin < fmax, got fmin=1e\\+06 Hz, fmax=1 Hz$"),
        ('[units]\niload = 5\n', "[units]", 'units must be a table of texts, e.g. \\[units\\] iload = "A"$'),
        ('[axes]\nnetlist = [" "]\n', "netlist = [", "netlist is empty$"),
    ],
)
def test_semantic_errors_point_at_the_offending_key(tmp_path, body, key, expected):
    """A plan that parses as TOML but says something wrong gives PlanError at the line of the offending key."""
    path = _plan(tmp_path, body)
    line = next(i + 1 for i, text in enumerate(path.read_text().splitlines()) if text.startswith(key))
    with pytest.raises(PlanError, match=rf"plan\.toml:{line}: .*{expected}"):
        load_plan(path)


@pytest.mark.parametrize(
    ("axes", "expected"),
    [
        ('param.nosuch = ["1"]', "no top-level '.param nosuch"),
        ('supply.vnone = [1.0]', "no top-level voltage source 'vnone'"),
        ('element.rnone = ["1k"]', "no top-level resistor, capacitor or inductor 'rnone'"),
        ('element.m6 = ["1k"]', "M6 is not a resistor, capacitor or inductor"),
        ('lib = ["xx"]', "has no section 'xx'"),
    ],
)
def test_settings_the_netlist_cannot_take_fail_before_any_simulation(tmp_path, axes, expected):
    """check_plan applies every corner up front: an unknown .param, source or .lib section is a PlanError at that axis's line."""
    path = _plan(tmp_path, f"[axes]\ntemp = [27, 80]\n{axes}\n")
    line = path.read_text().splitlines().index(axes) + 1
    with pytest.raises(PlanError, match=rf"plan\.toml:{line}: .*{expected}"):
        check_plan(load_plan(path))


def test_corner_netlist_equals_a_hand_edited_copy_and_the_user_file_is_untouched(tmp_path):
    """Applying lib=ss, temp=125, .param cc and supply vdd gives the very netlist a designer gets by editing a copy by hand."""
    before = hashlib.sha256(MILLER.read_bytes()).hexdigest()
    settings = (Setting("lib", "", "ss"), Setting("temp", "", "125"), Setting("param", "cc", "0.8p"), Setting("supply", "vdd", "2.9"))
    ours = apply_settings(str(MILLER), settings)
    # the reference: the same four edits made by hand on a copy next to a copy of the library
    (tmp_path / "models").mkdir()
    shutil.copy(LIB, tmp_path / "models" / "corners.lib")
    text = MILLER.read_text()
    text = text.replace(".lib models/corners.lib tt", ".lib models/corners.lib ss")
    text = text.replace(".param cc=1.2p", ".param cc=0.8p")
    text = text.replace("Vdd vdd 0 dc {vdd}", "Vdd vdd 0 dc 2.9")
    text = text.replace("\n.end", "\n.temp 125\n.end")
    hand = parse_text(text, source=str(tmp_path / "x.cir"), base_dir=str(tmp_path))
    strip = lambda nl: [line for line in write_netlist(nl).splitlines() if not line.startswith((".lib", "*"))]  # noqa: E731
    assert sorted(strip(ours)) == sorted(strip(hand))
    assert any(".model nch nmos (level=1 vto=0.63" in d.text for d in ours.directives)  # the ss card of corners.lib
    assert hashlib.sha256(MILLER.read_bytes()).hexdigest() == before
    assert parse_file(MILLER).lib_sections[0][1] == "tt"


def test_temperature_replaces_an_existing_temp(tmp_path):
    """A netlist's own .temp and `.option temp=` give way to the corner's temperature (one .temp remains)."""
    src = tmp_path / "t.cir"
    src.write_text("t\n.option temp=50 reltol=1e-4\n.temp 60\nR1 a 0 1k\nV1 a 0 dc 1\n.end\n")
    nl = apply_settings(str(src), (Setting("temp", "", "-40"),))
    temps = [d.text for d in nl.directives if d.keyword == ".temp"]
    options = [d.text for d in nl.directives if d.keyword == ".option"]
    assert temps == [".temp -40"]
    assert "temp=" not in options[0] and "reltol=1e-4" in options[0]


def test_a_break_node_the_netlist_lacks_is_a_plan_error_at_the_at_line(tmp_path):
    """A misspelt break node stops the run before any simulation, at the plan's `at` line, with the netlist's suggestion."""
    path = tmp_path / "plan.toml"
    path.write_text(f'netlist = "{MILLER}"\nrequire = ["pm>=45"]\nat = "outt"\n')
    with pytest.raises(PlanError, match=r"plan\.toml:3: .*'outt'.*did you mean 'out'"):
        check_plan(load_plan(path))


def test_task_keys_follow_what_decides_a_result(tmp_path):
    """Re-reading the same plan gives the same keys (so --resume skips them); a changed requirement or sweep gives new keys."""
    body = '[axes]\nlib = ["tt", "ss"]\n'
    keys = lambda path: [t.key for t in tasks_of(load_plan(path), expand(load_plan(path)))]  # noqa: E731
    first = keys(_plan(tmp_path, body, "a.toml"))
    assert keys(_plan(tmp_path, body, "b.toml")) == first
    assert set(keys(_plan(tmp_path, 'require = ["pm>=50"]\n' + body, "c.toml"))).isdisjoint(first)
    assert set(keys(_plan(tmp_path, body + '[sweep]\npoints_per_decade = 20\n', "d.toml"))).isdisjoint(first)


def test_cli_exits_2_with_the_plan_line_and_writes_no_results_file(tmp_path, capsys):
    """`netloop corners` on an invalid plan prints one message with file:line, exits 2 and creates no results file."""
    from netloop.cli.main import main

    path = _plan(tmp_path, '[axes]\nlib = ["tt", "sf"]\n')
    assert main(["corners", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("netloop: error: ") and f"{path}:4: " in err and "no section 'sf'" in err
    assert len(err.strip().splitlines()) == 1
    assert not (tmp_path / "plan.results.jsonl").exists()


def test_toml_cut_short_names_its_last_line(tmp_path):
    """A plan that ends in the middle of a value still gets a line: the last one (tomllib gives none there)."""
    plan = tmp_path / "plan.toml"
    plan.write_text('netlist = "x.cir"\nat = [\n')
    with pytest.raises(PlanError, match=r"plan\.toml:2: not valid TOML"):
        load_plan(plan)


def test_a_param_setting_changes_only_the_parameter_it_names(tmp_path):
    """Setting vdd=2.5 in `.param vdd=3.3 avdd=1.8 vdd_hi=4` changes vdd alone: the netlist equals a hand-edited copy."""
    text = "t\n.param vdd=3.3 avdd=1.8 vdd_hi=4\n.param xvdd = 5\nV1 a 0 dc {vdd}\nV2 b 0 dc {avdd}\nR1 a b 1k\n.end\n"
    src = tmp_path / "p.cir"
    src.write_text(text)
    ours = apply_settings(str(src), (Setting("param", "vdd", "2.5"),))
    hand = parse_text(text.replace("vdd=3.3", "vdd=2.5"), source=str(src))  # reference: the one edit made by hand
    assert write_netlist(ours) == write_netlist(hand)
    assert [d.text for d in ours.directives if d.keyword == ".param"] == [".param vdd=2.5 avdd=1.8 vdd_hi=4", ".param xvdd = 5"]


def test_plan_values_with_units_mean_what_an_engineer_means(tmp_path):
    """A plan's requirement and sweep limits read 100MHz as 1e8 Hz and 10mHz as 0.01 Hz (SI), as the command line does."""
    plan = load_plan(_plan(tmp_path, 'require = ["fc >= 100MHz", "dm >= 1ns"]\n[sweep]\nfmin_hz = "10mHz"\nfmax_hz = "2.5GHz"\n'))
    assert [r.threshold for r in plan.requirements] == [100e6, 1e-9]
    assert (plan.sweep.fmin_hz, plan.sweep.fmax_hz) == (0.01, 2.5e9)


def test_lib_and_include_words_keep_their_case_and_other_names_are_lowered():
    """File names and include paths are case-sensitive (POSIX file names), so include.TT and lib.Fam keep their case;
    element, supply and param names are SPICE names, which ngspice reads case-insensitively (ngspice manual, General Structure and Conventions)."""
    plan = parse_plan('netlist = "a.cir"\nat = "out"\n[axes]\ninclude.TT = ["TT", "SS"]\nlib.Fam = ["tt", "ss"]\n'
                      'supply.VDD = [1, 2]\n')
    assert [(a.kind, a.target) for a in plan.axes] == [("include", "TT"), ("lib", "Fam"), ("supply", "vdd")]


def test_plan_errors_name_the_line_and_what_to_do(tmp_path):
    """A corner plan with a [samples] table is refused at that table's line with the command that runs it; an unknown
    top-level key is refused at its own line with the keys allowed; an unreadable plan (a folder) is named with the
    system's reason (the messages the command line shows: tests/cli/test_bad_input.py)."""
    with pytest.raises(PlanError) as samples:
        parse_plan('netlist = "a.cir"\nat = "out"\n[samples]\ncount = 3\n', str(tmp_path / "p.toml"))
    assert str(samples.value) == (f"{tmp_path / 'p.toml'}:3: [samples] makes this a statistical plan: run it with "
                                  "'netloop yield PLAN' (netloop corners runs plans without [samples])")
    with pytest.raises(PlanError) as unknown:
        parse_plan('netlist = "a.cir"\nat = "out"\n\ncorner_count = 3\n', str(tmp_path / "p.toml"))
    assert str(unknown.value).startswith(f"{tmp_path / 'p.toml'}:4: unknown key 'corner_count'; expected one of ")
    with pytest.raises(PlanError) as unreadable:
        load_plan(tmp_path)
    assert str(unreadable.value) == f"cannot read plan {str(tmp_path)!r}: Is a directory"


def test_errors_inside_tables_point_at_their_own_lines(tmp_path):
    """A second [[corner]] whose name is not text is refused at that name's line, not the first corner's nor its table
    header; a process axis with no [process.NAME] tables says how to add one; a [regression] table that is not a table of
    limits is refused at its own line in the plan file (the messages the command line shows for bad plans)."""
    path = str(tmp_path / "p.toml")
    head = 'netlist = "a.cir"\nat = "out"\n'
    with pytest.raises(PlanError) as name:
        parse_plan(head + '[[corner]]\nname = "hot"\ntemp = 80\n\n[[corner]]\ntemp = 0\nname = 5\n', path)
    assert str(name.value) == f"{path}:9: a corner's name must be text"
    with pytest.raises(PlanError) as process:
        parse_plan(head + '[axes]\nprocess = ["slow"]\n', path)
    assert str(process.value) == f"{path}:4: no process corner named 'slow' (the plan's process corners: none: add [process.NAME] tables)"
    with pytest.raises(PlanError) as regression:
        parse_plan(head + '\nregression = 3\n', path)
    assert str(regression.value).startswith(f"{path}:4: regression must be a table ([regression]) of limits")


def test_each_setting_reads_in_a_corner_name_as_the_readme_shows_it():
    """Corner names join the settings' labels ("ss/125C/vsup=1.7V", README): a variant netlist by its stem, a process
    section or table by its name, a temperature in C, a supply in V, a seed, and any other setting as target=value."""
    labels = {kind: Setting(kind, target, value).label for kind, target, value in [
        ("netlist", "", "variants/amp_rev_b.cir"), ("process", "", "ss"), ("lib", "process.spice", "ff"), ("include", "tt", "ss"),
        ("temp", "", "-40"), ("supply", "vsup", "1.7"), ("seed", "", "17"), ("param", "ibias", "12u"), ("element", "cc", "2p")]}
    assert labels == {"netlist": "amp_rev_b", "process": "ss", "lib": "ff", "include": "ss", "temp": "-40C", "supply": "vsup=1.7V",
                      "seed": "seed=17", "param": "ibias=12u", "element": "cc=2p"}
