"""A job whose netlist differs from the loaded circuit only in values ngspice changes in place runs on that circuit, bit for bit as a fresh load."""

from __future__ import annotations

import numpy as np
import pytest

from netloop.sim import AcRun, AcSweep, Alter, Change, SimJob
from netloop.sim.in_place import change_commands, explained
from netloop.sim.numbers import netlist_number

# A two-stage amplifier of invented level-1 cards (for tests only): its model card's threshold is an
# expression of the parameter dvt, its compensation capacitor the parameter cc, its supply a V source,
# its bias an I source, its nulling resistor and load capacitor plain values; the temperature moves the
# operating point through the cards' temperature laws and the resistor's temperature coefficient.
AMP = """two-stage amplifier (invented level-1 cards)
.param dvt=0 cc=1.2p
.model nch nmos (level=1 vto={{0.55+dvt}} kp=180u lambda=0.06 cgso=0.3n cgdo=0.3n cj=0.6m)
.model pch pmos (level=1 vto=-0.6 kp=70u lambda=0.08 cgso=0.3n cgdo=0.3n cj=0.8m)
vdd vdd 0 dc {vdd}
ibias vdd nb dc {ibias}
vin inp 0 dc 1.65 ac 0
m8 nb nb 0 0 nch w=10u l=1u
m5 tail nb 0 0 nch w=20u l=1u
m1 d1 out tail 0 nch w=20u l=1u
m2 o1 inp tail 0 nch w=20u l=1u
m3 d1 d1 vdd vdd pch w=20u l=1u
m4 o1 d1 vdd vdd pch w=20u l=1u
m6 out o1 vdd vdd pch w=80u l=1u
m7 out nb 0 0 nch w=50u l=1u
rz o1 cz {rz} tc1=2e-3
cc cz out {{cc}}
cl out 0 {cl}
{temp}"""
SWEEP = (AcSweep("dec", 10, 1e2, 1e9),)
BASE = {"vdd": "3.3", "ibias": "20u", "dvt": "0", "cc": "1.2p", "temp": "27", "rz": "1.5k", "cl": "2p"}


def _netlist(values: dict[str, str], title: str = "") -> str:
    """The amplifier at ``values``; ``title`` (a test's own) makes it a circuit no earlier test left loaded."""
    text = (title + " " if title else "") + AMP.format(vdd=values["vdd"], ibias=values["ibias"], rz=values["rz"], cl=values["cl"], temp=f".temp {values['temp']}")
    return text.replace("dvt=0 cc=1.2p", f"dvt={values['dvt']} cc={values['cc']}")


def _changes(values: dict[str, str]) -> tuple[Change, ...]:
    return (Change("temp", "", values["temp"]), Change("source", "vdd", values["vdd"]), Change("source", "ibias", values["ibias"]),
            Change("param", "dvt", values["dvt"]), Change("param", "cc", values["cc"]), Change("element", "rz", values["rz"]),
            Change("element", "cl", values["cl"]))


def _job(values: dict[str, str], name: str, in_place: bool = True, op_voltages: bool = False, title: str = "", label: str = "") -> SimJob:
    return SimJob(_netlist(values, title), runs=(AcRun("a", {"vin": 1.0}, SWEEP),), save=("v(out)", "v(o1)"), excitable=("vin",),
                  op_voltages=op_voltages, circuit_id=name, changes=_changes(values) if in_place else (), label=label)


def _vectors(result) -> np.ndarray:
    return np.concatenate([result.runs[0].vectors["v(out)"], result.runs[0].vectors["v(o1)"]])


@pytest.mark.ngspice
@pytest.mark.parametrize(("key", "value"), [
    ("temp", "125"), ("temp", "-40"), ("vdd", "3.0"), ("vdd", "1.65"), ("ibias", "17u"), ("cc", "0.6p"), ("dvt", "0.08"),
    ("rz", "2.7k"), ("cl", "3.3p"),
], ids=["temp-125", "temp-minus-40", "supply-3.0", "supply-1.65", "current-source", "param-element", "param-in-model-card",
        "element-resistor", "element-capacitor"])
def test_a_change_in_place_equals_a_fresh_load_bit_for_bit(shared_sim, key, value):
    """After another corner ran on the loaded circuit, a job that changes one value in place (temperature, a V or I
    source's DC value, a .param of an element value or inside a model card's expression, an R or C value) runs without a load and gives
    exactly the vectors of loading its netlist afresh, which differ from the first corner's (ngspice is the reference)."""
    changed = {**BASE, key: value}
    first = shared_sim.run(_job(BASE, f"first-{key}-{value}", title=f"{key}={value}"))
    in_place = shared_sim.run(_job(changed, f"second-{key}-{value}", title=f"{key}={value}"))
    fresh = shared_sim.run(_job(changed, f"fresh-{key}-{value}", in_place=False, title=f"{key}={value}"))
    assert first.loaded and not in_place.loaded and fresh.loaded
    assert np.array_equal(_vectors(in_place), _vectors(fresh))
    assert np.array_equal(in_place.runs[0].freq_hz, fresh.runs[0].freq_hz)
    assert not np.array_equal(_vectors(in_place), _vectors(first))  # the value really changed the circuit


# A process library as real ones are written (invented cards, for tests only): a section whose model card's threshold
# is an expression of a library parameter, itself an expression of the netlist's top-level dvt; and a cell (subcircuit)
# whose width takes a parameter of the instance line, an expression of dvt too.
LIBRARY = """* INVENTED library for tests: one section
.lib typ
.param vt_lib={0.55 + 2*dvt}
.model nlib nmos (level=1 vto={vt_lib} kp=180u lambda=0.06 cgso=0.3n cgdo=0.3n cj=0.6m)
.endl typ
"""
CELL = """library parameters through two levels (invented)
.param dvt={dvt}
.lib {library} typ
.subckt cell d g s k=1
m1 d g s s nlib w={{10u*k}} l=1u
.ends
vdd vdd 0 dc 3
vg g 0 dc 1.2 ac 1
r1 vdd d 10k
x1 d g 0 cell k={{1+dvt}}
c1 d 0 1p
"""


@pytest.mark.ngspice
def test_a_parameter_reaching_a_library_model_and_a_cell_is_evaluated_again_in_place(shared_sim, tmp_path):
    """A top-level .param that reaches a model card only through a library section's own .param, and a cell's width only
    through its instance line, changed in place (alterparam, reset) gives the vectors of a fresh load of the edited
    netlist, which differ from the first: ngspice evaluates the whole chain again, so such a change needs no reload."""
    library = tmp_path / "invented.lib"
    library.write_text(LIBRARY)

    def job(dvt: str, name: str, in_place: bool = True) -> SimJob:
        return SimJob(CELL.format(dvt=dvt, library=library), runs=(AcRun("a", {"vg": 1.0}, SWEEP),), save=("v(d)",),
                      excitable=("vg",), circuit_id=name, changes=(Change("param", "dvt", dvt),) if in_place else ())

    first = shared_sim.run(job("0", "chain-first"))
    in_place = shared_sim.run(job("0.05", "chain-second"))
    fresh = shared_sim.run(job("0.05", "chain-fresh", in_place=False))
    assert first.loaded and not in_place.loaded and fresh.loaded
    assert np.array_equal(in_place.runs[0].vectors["v(d)"], fresh.runs[0].vectors["v(d)"])
    assert not np.array_equal(in_place.runs[0].vectors["v(d)"], first.runs[0].vectors["v(d)"])


@pytest.mark.ngspice
def test_several_changes_in_a_row_each_equal_a_fresh_load(shared_sim):
    """Five corners in a row on one loaded circuit, each changing every value, give the vectors of five fresh loads."""
    corners = [{**BASE, "temp": t, "vdd": v, "dvt": d, "cc": c, "cl": cl}
               for t, v, d, c, cl in (("-40", "3.0", "0.05", "1p", "2p"), ("125", "3.6", "-0.05", "1.4p", "1.5p"), ("27", "3.3", "0", "1.2p", "2p"),
                                      ("85", "2.7", "0.1", "0.8p", "4.7p"), ("0", "3.3", "0", "1.2p", "4.7p"))]
    chain = [shared_sim.run(_job(c, f"chain-{i}", title="chain")) for i, c in enumerate(corners)]
    assert [r.loaded for r in chain] == [True, False, False, False, False]
    for i, c in enumerate(corners):
        assert np.array_equal(_vectors(chain[i]), _vectors(shared_sim.run(_job(c, f"chain-fresh-{i}", in_place=False, title="chain"))))


@pytest.mark.ngspice
def test_the_operating_point_of_a_job_changed_in_place_is_its_own(shared_sim):
    """With op_voltages a job changed in place reports the node voltages of its own operating point, those of a fresh load."""
    hot = {**BASE, "temp": "125", "vdd": "3.0"}
    shared_sim.run(_job(BASE, "op-first", op_voltages=True))
    in_place = shared_sim.run(_job(hot, "op-second", op_voltages=True))
    fresh = shared_sim.run(_job(hot, "op-fresh", in_place=False, op_voltages=True))
    assert not in_place.loaded
    assert in_place.operating_point == fresh.operating_point
    assert in_place.operating_point["vdd"] == pytest.approx(3.0)


@pytest.mark.ngspice
def test_a_netlist_that_differs_elsewhere_is_loaded_afresh(shared_sim):
    """A job whose netlist differs in a line no change explains (another sink width) is read afresh, never changed in place."""
    shared_sim.run(_job(BASE, "elsewhere-first"))
    other = _job({**BASE, "temp": "85"}, "elsewhere-second")
    other = SimJob(other.netlist.replace("m7 out nb 0 0 nch w=50u", "m7 out nb 0 0 nch w=60u"), other.runs, other.save, other.excitable,
                   op_voltages=False, circuit_id="elsewhere-second", changes=other.changes)
    assert shared_sim.run(other).loaded


def test_explained_accepts_only_the_values_of_the_changes():
    """Two netlists count as one circuit when they differ only in the changed values (the temperature, a source's DC
    value, a changed parameter's value on a .param line that also defines others); any other difference, an unchanged
    parameter's value or a source's AC value included, makes them two circuits; an R, C or L value counts when changed."""
    a = _netlist(BASE)
    changes = _changes(BASE)
    assert explained(a, _netlist({**BASE, "temp": "125", "vdd": "3.0", "cc": "1p"}), changes)
    assert not explained(a, a.replace("m7 out nb 0 0 nch w=50u", "m7 out nb 0 0 nch w=60u"), changes)
    assert explained(a, a.replace("cl out 0 2p", "cl out 0 3p"), changes)
    assert not explained(a, a.replace("cl out 0 2p", "cl out 0 3p"), changes[:-1])  # cl is not among these
    only_cc = (Change("param", "cc", "1p"),)
    assert explained(a, _netlist({**BASE, "cc": "1p"}), only_cc)
    assert not explained(a, _netlist({**BASE, "cc": "1p", "dvt": "0.1"}), only_cc)  # dvt is not among the changes
    assert not explained(a, a + "\nr9 out 0 1k\n", changes)
    vin = (Change("source", "vin", "1.65"),)
    assert explained(a, a.replace("vin inp 0 dc 1.65 ac 0", "vin inp 0 dc 1.7 ac 0"), vin)
    assert not explained(a, a.replace("vin inp 0 dc 1.65 ac 0", "vin inp 0 dc 1.65 ac 1"), vin)


def test_explained_reads_continued_cards_and_sources_without_a_value():
    """A card continued on '+' lines is one card: a source whose DC value sits on its continuation line differs only in
    that value, however many lines come before it; a source card that names 'dc' and no value is left as it is."""
    head = "stage\nr1 a b 1k\nc1 b 0 1p\nm1 b a 0 0 nch w=1u\n+ l=1u\n"
    vdd = (Change("source", "vdd", "3.3"),)
    loaded = head + "vdd vdd 0\n+ dc 3.3 ac 0\n"
    assert explained(loaded, loaded.replace("dc 3.3", "dc 3.0"), vdd)
    assert not explained(loaded, loaded.replace("+ l=1u", "+ l=2u"), vdd)
    bare = head + "vdd vdd 0 dc\n"
    assert explained(bare, bare, vdd)
    assert not explained(bare, head + "vdd vdd 0 dc 1\n", vdd)


def test_a_parameter_change_resets_the_circuit_and_sets_temperature_and_sources_again():
    """alterparam needs ngspice's reset, after which the temperature, every source value and every R, C, L value are given again; without a
    parameter change only the values that differ are sent, numbers as ngspice's netlist reader makes them."""
    current = {c.key: c.value for c in _changes(BASE)}
    commands, reset = change_commands(_changes({**BASE, "cc": "1p"}), current)
    assert reset and commands[:2] == ["alterparam cc=1p", "reset"]
    assert {"option temp=27", "alter vdd dc = 33 * 1e-1", "alter ibias dc = 20 * 1e-6", "alter rz = 15 * 1e2", "alter cl = 2 * 1e-12"} <= set(commands)
    commands, reset = change_commands(_changes({**BASE, "vdd": "1.65"}), current)
    assert not reset and commands == ["alter vdd dc = 165 * 1e-2"]
    commands, reset = change_commands(_changes({**BASE, "cl": "4.7p"}), current)
    assert not reset and commands == ["alter cl = 47 * 1e-13"]


@pytest.mark.ngspice
def test_netlist_number_is_the_double_ngspice_reads_from_a_netlist(shared_sim):
    """For values whose correctly rounded double differs from ngspice's (1.65, 3.3) and others, netlist_number gives
    bit for bit the DC value ngspice 39 stores for a source card (its loaded value, read back through an Alter)."""
    tokens = ("1.65", "3.3", "3.3e0", "0.1", "-40", "2.7", "10u", "17u", "2.5meg", "1.2345678901234", "125", "1.8v", "3.", "-1.65", "2.5m", "33m", "1.5mil")
    netlist = "values\n" + "".join(f"v{i} n{i} 0 dc {t}\nr{i} n{i} 0 1k\n" for i, t in enumerate(tokens))
    result = shared_sim.run(SimJob(netlist, runs=(), save=(), alters=tuple(Alter(f"v{i}", "dc") for i in range(len(tokens)))))
    for i, token in enumerate(tokens):
        assert result.parameters[f"@v{i}[dc]"] == netlist_number(token), token
    assert netlist_number("1.65") != 1.65  # ngspice's reader is not correctly rounded: why numbers go through netlist_product


@pytest.mark.ngspice
def test_netlist_product_gives_alter_the_readers_double(shared_sim):
    """alter with netlist_product(token) leaves a source holding exactly what a card "dc token" loads (both read back
    from ngspice), where the token's own text or its repr would not always."""
    tokens = ("1.65", "3.3", "17u", "1.7e-05", "0.1", "-40.1", "2.5meg", "123.456789", "4.7n", "-0.0123")
    for i, token in enumerate(tokens):
        source = f"v1 a 0 dc {token}\nr1 a 0 1k\n"
        loaded = shared_sim.run(SimJob("value\n" + source, runs=(), save=(), alters=(Alter("v1", "dc"),)))
        first = shared_sim.run(SimJob(f"value {i}\nv1 a 0 dc 0\nr1 a 0 1k\n", runs=(), save=(), circuit_id=f"product-{i}",
                                      changes=(Change("source", "v1", "0"),)))
        assert first.loaded
        changed = shared_sim.run(SimJob(f"value {i}\n" + source, runs=(), save=(), circuit_id=f"product-{i}-b",
                                        changes=(Change("source", "v1", token),), alters=(Alter("v1", "dc"),)))
        assert not changed.loaded
        assert changed.parameters["@v1[dc]"] == loaded.parameters["@v1[dc]"], token


@pytest.mark.ngspice
def test_a_circuit_kept_beside_another_takes_its_next_corner_without_a_load(shared_sim):
    """A corner's circuit, then another circuit (as the other splits a doubted corner measures), then the next corner:
    ngspice still holds the first circuit and the corner runs on it, its temperature and supply changed in place, with
    exactly the vectors of a fresh load; a parameter change on it (which needs ngspice's reset, only for the circuit it
    read last) loads afresh, with exactly those vectors too (ngspice's fresh load is the reference)."""
    title = "kept beside another"
    shared_sim.run(_job(BASE, "kept-corner-1", title=title, label="corner 1"))
    other = shared_sim.run(_job(BASE, "kept-other", title="another circuit", label="corner 1"))
    hot = {**BASE, "temp": "85", "vdd": "3.0"}
    second = shared_sim.run(_job(hot, "kept-corner-2", title=title, label="corner 2"))
    assert other.loaded and not second.loaded
    assert np.array_equal(_vectors(second), _vectors(shared_sim.run(_job(hot, "kept-fresh-2", in_place=False, title=title))))
    shared_sim.run(_job(BASE, "kept-other-2", title="another circuit"))
    param = {**hot, "cc": "0.8p"}
    third = shared_sim.run(_job(param, "kept-corner-3", title=title))
    assert np.array_equal(_vectors(third), _vectors(shared_sim.run(_job(param, "kept-fresh-3", in_place=False, title=title))))


@pytest.mark.ngspice
def test_a_corner_circuit_outlasts_several_other_circuits_loaded_after_it(shared_sim):
    """A corner's circuit, then three other circuits one after the other (the other splits of a doubted corner: jobs of
    the same label), then the next corner: it runs on the corner's circuit without a load, bit for bit a fresh load
    (ngspice's reference)."""
    title = "outlasts others"
    shared_sim.run(_job(BASE, "outlast-corner-1", title=title, label="corner 1"))
    for n in range(3):
        assert shared_sim.run(_job(BASE, f"outlast-other-{n}", title=f"other split {n}", label="corner 1")).loaded
    cold = {**BASE, "temp": "-40", "ibias": "17u"}
    second = shared_sim.run(_job(cold, "outlast-corner-2", title=title, label="corner 2"))
    assert not second.loaded
    assert np.array_equal(_vectors(second), _vectors(shared_sim.run(_job(cold, "outlast-fresh", in_place=False, title=title))))
