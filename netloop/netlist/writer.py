"""Write a ``Netlist`` back as one self-contained ngspice netlist."""

from __future__ import annotations

from netloop.netlist.model import Directive, Element, Inclusion, Netlist, Statement, Subcircuit

__all__ = ["write_netlist"]


def _path_arg(path: str) -> str:
    return f'"{path}"' if any(c.isspace() for c in path) else path


def _subckt_lines(sub: Subcircuit, out: list[str]) -> None:
    head = [".subckt", sub.name, *sub.pins]
    if sub.params:
        head.append("params:")
        head.extend(f"{k}={v}" if v else k for k, v in sub.params)
    out.append(" ".join(head))
    for s in sub.body:
        _statement_lines(s, out)
    out.append(f".ends {sub.name}")


def _statement_lines(s: Statement, out: list[str]) -> None:
    if isinstance(s, Element):
        out.append(s.card())
    elif isinstance(s, Directive):
        out.append(s.text)
    else:
        _subckt_lines(s, out)


def _reference(inc: Inclusion) -> str:
    if inc.kind == "lib":
        return f".lib {_path_arg(inc.path)} {inc.section}"
    return f".include {_path_arg(inc.path)}"


def write_netlist(netlist: Netlist) -> str:
    """The netlist as text that ngspice reads to the same circuit: title, statements, ``.end``.

    Included files and library sections are inlined, with one exception that keeps decks
    built on large process libraries small and fast: a top-level ``.include FILE`` or
    ``.lib FILE SECTION`` is written again as that statement (with the absolute path) when
    every statement it brought in still stands in ``netlist.statements`` as the very same
    record, in the same order, and nothing from it was set aside (no analysis or ``.control``
    block came from it). Whoever builds a new netlist from this one (e.g. by replacing an
    element or a subcircuit definition that came from an included file) therefore gets that
    file inlined, with the change, automatically. Analyses and ``.control`` blocks
    (``netlist.ignored``) are never written.
    """
    out: list[str] = [netlist.title]
    starts: dict[int, list[Inclusion]] = {}
    for inc in netlist.inclusions:
        if inc.clean and inc.statements:
            starts.setdefault(id(inc.statements[0]), []).append(inc)
    stmts = netlist.statements
    i, n = 0, len(stmts)
    while i < n:
        s = stmts[i]
        for inc in starts.get(id(s), ()):
            k = len(inc.statements)
            if inc.statements[0] is s and stmts[i : i + k] == inc.statements:
                out.append(_reference(inc))
                i += k
                break
        else:
            _statement_lines(s, out)
            i += 1
    out.append(".end")
    return "\n".join(out) + "\n"
