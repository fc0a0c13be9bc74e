"""Property tests: parse -> write -> parse keeps every record, and no input raises anything but a NetlistError."""

from __future__ import annotations

from dataclasses import replace

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from netloop.errors import NetlistError
from netloop.netlist import Directive, Element, Subcircuit, parse_file, parse_text, write_netlist
from netloop.netlist.location import SourceLocation

_NOWHERE = SourceLocation("", 0)


def _bare(statements):
    """Statements with locations (and the as-written .subckt header) blanked, for comparison."""
    out = []
    for s in statements:
        if isinstance(s, Subcircuit):
            out.append(replace(s, location=_NOWHERE, header="", body=_bare(s.body)))
        else:
            out.append(replace(s, location=_NOWHERE))
    return tuple(out)


node = st.sampled_from(["0", "gnd", "a", "b", "Out", "in+", "n-1", "bus[3]", "vdd", "X_y"])
value = st.sampled_from(["1k", "10pF", "2.2u", "1meg", "{r1*2}", "'a + b'", "3", "1e-3"])
param = st.builds(lambda k, v, sp: f"{k}{sp}={sp}{v}", st.sampled_from(["w", "l", "m", "ic"]), value, st.sampled_from(["", " ", "  "]))


@st.composite
def element_line(draw, idx: int, subckts: list[tuple[str, int]]):
    kind = draw(st.sampled_from("RCLVIEGMDQBX" if subckts else "RCLVIEGMDQB"))
    name = draw(st.sampled_from([kind, kind.lower()])) + str(idx)
    n = lambda: draw(node)  # noqa: E731
    if kind in "RCL":
        body = [n(), n(), draw(value)]
    elif kind in "VI":
        body = [n(), n(), draw(st.sampled_from(["dc 1", "1.8", "dc 0 ac 1", "SIN(0 1 1k)", "PULSE(0 1 0 1n 1n 5n 10n)"]))]
    elif kind in "EG":
        if draw(st.booleans()):
            body = [n(), n(), n(), n(), draw(value)]
        else:
            body = [n(), n(), "POLY(2)", n(), n(), n(), n(), "0", "1", "1"]
    elif kind == "M":
        body = [n(), n(), n(), n(), "nch"] + draw(st.lists(param, max_size=2))
    elif kind == "D":
        body = [n(), n(), "dmod"]
    elif kind == "Q":
        body = [n(), n(), n()] + ([n()] if draw(st.booleans()) else []) + ["qmod"]
    elif kind == "B":
        body = [n(), n(), "V = { V(a) * 2 }"]
    else:
        sub, pins = draw(st.sampled_from(subckts))
        body = [n() for _ in range(pins)] + [sub.upper() if draw(st.booleans()) else sub] + draw(st.lists(param, max_size=2))
    return " ".join([name, *body])


def _spread(draw, line: str) -> list[str]:
    """Write one statement as one or more physical lines with comments and continuations."""
    words = line.split(" ")
    out: list[str] = []
    cur = [words[0]]
    for w in words[1:]:
        if draw(st.integers(0, 5)) == 0 and "{" not in w and "'" not in w and "=" not in w:
            out.append(" ".join(cur))
            if draw(st.booleans()):
                out.append("* a comment inside a continued statement")
            cur = ["+", w]
        else:
            cur.append(w)
    out.append(" ".join(cur))
    if draw(st.booleans()):
        out[-1] += draw(st.sampled_from([" ; trailing", " $ trailing"]))
    return out


@st.composite
def netlists(draw) -> str:
    lines = ["random netlist", ".model nch nmos level=1", ".model dmod d", ".model qmod npn", ".param r1=1k a=1 b=2"]
    subckts: list[tuple[str, int]] = []
    for s in range(draw(st.integers(0, 2))):
        pins = draw(st.integers(1, 3))
        lines.append(f".subckt sub{s} " + " ".join(f"p{i}" for i in range(pins)) + (" params: g=1" if draw(st.booleans()) else ""))
        for i in range(draw(st.integers(1, 3))):
            lines.extend(_spread(draw, draw(element_line(100 * (s + 1) + i, subckts))))
        lines.append(f".ends sub{s}")
        subckts.append((f"sub{s}", pins))
    for i in range(draw(st.integers(1, 12))):
        if draw(st.integers(0, 6)) == 0:
            lines.append("* comment line")
        lines.extend(_spread(draw, draw(element_line(i, subckts))))
    lines.append(".end")
    return "\n".join(lines) + "\n"


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(netlists())
def test_parse_write_parse_round_trip(text):
    """Random valid netlists survive parse -> write -> parse with the same records (locations aside)."""
    first = parse_text(text)
    second = parse_text(write_netlist(first))
    assert second.title == first.title
    assert _bare(second.statements) == _bare(first.statements)
    assert second.globals == first.globals


@settings(max_examples=300, deadline=None)
@given(st.one_of(st.text(alphabet=st.sampled_from(list("RCMXQEVKA.+*;$={}'()[] \t\nabc01kp:-params.subckt.ends.lib.include")), max_size=200), st.text(max_size=200)))
def test_random_text_raises_only_netlist_errors(text):
    """Arbitrary text is either a netlist or a NetlistError, never another exception."""
    try:
        parse_text(text)
    except NetlistError:
        pass


@settings(max_examples=100, deadline=None)
@given(st.binary(max_size=300))
def test_random_bytes_file_raises_only_netlist_errors(tmp_path_factory, data):
    """A file of random bytes is either read or a NetlistError, never another exception."""
    path = tmp_path_factory.mktemp("bytes") / "junk.cir"
    path.write_bytes(data)
    try:
        parse_file(path)
    except NetlistError:
        pass


def test_directive_and_element_records_survive_round_trip():
    """A hand-written netlist with every statement family writes back to the same records."""
    text = (
        "t\n.param x = 2\n.global vdd\n.subckt s a b params: k=3\n.subckt t c\nR1 c 0 1\n.ends\n"
        "Xt a t\nR2 a b {k*x}\n.ends s\nX1 1 2 s k=4\n.model d1 d\n.if (x == 2)\nD1 1 0 d1\n.endif\n"
    )
    first = parse_text(text)
    again = parse_text(write_netlist(first))
    assert _bare(again.statements) == _bare(first.statements)
    assert isinstance(again.statements[0], Directive) and isinstance(again.statements[-2], Element)
