"""Apply a corner's settings to a netlist: a new Netlist from a rewritten copy; the user's files are never written."""

from __future__ import annotations

import os
import re
from dataclasses import replace
from pathlib import Path

from netloop.jobs.corners.plan import Setting
from netloop.errors import NetlistError, NetloopError
from netloop.netlist import Directive, Element, Netlist, SourceLocation, parse_file, parse_text

__all__ = ["CornerApplyError", "apply_settings", "lib_lines"]

_LIB_LINE = re.compile(r"^(?P<head>\s*\.lib\s+(?:\"[^\"]*\"|'[^']*'|\S+)\s+)(?P<section>[^\s$;]+)", re.IGNORECASE)
_SOURCE_WORDS = frozenset("ac dc pulse sin exp pwl sffm am trnoise trrandom distof1 distof2 portnum z0".split())


class CornerApplyError(NetloopError):
    """A setting that the netlist cannot take (no such .lib line, .param or voltage source); ``setting`` says which."""

    def __init__(self, message: str, setting: Setting | None = None):
        self.setting = setting
        super().__init__(message)


def lib_lines(netlist: Netlist) -> tuple[tuple[str, int, str, str], ...]:
    """The top file's ``.lib FILE SECTION`` lines: (resolved library path, line, section, file as written)."""
    out = []
    for inc in netlist.inclusions:
        if inc.kind == "lib" and inc.location.file == netlist.source:
            out.append((inc.path, inc.location.line, inc.section or "", os.path.basename(inc.path)))
    return tuple(out)


def _pick_lib(netlist: Netlist, target: str) -> tuple[str, int, str, str]:
    lines = lib_lines(netlist)
    if not lines:
        raise CornerApplyError(f"{netlist.source} has no '.lib FILE SECTION' line of its own to change")
    if not target:
        if len(lines) > 1:
            names = ", ".join(f"{b} (line {ln})" for _, ln, _, b in lines)
            raise CornerApplyError(f"{netlist.source} has several .lib lines ({names}); name the file, e.g. lib.\"{lines[0][3]}\" = ...")
        return lines[0]
    want = target.replace("\\", "/").lower()
    hits = [ln for ln in lines if ln[0].replace("\\", "/").lower().endswith(want)]
    if len(hits) != 1:
        names = ", ".join(b for _, _, _, b in lines)
        raise CornerApplyError(f"{netlist.source}: {'no' if not hits else 'more than one'} .lib line reads {target!r} (its .lib files: {names})")
    return hits[0]


def _with_libs(netlist: Netlist, libs: tuple[Setting, ...]) -> Netlist:
    """Re-read the top file with the section of the chosen .lib lines replaced (one physical line each)."""
    if not libs:
        return netlist
    path = netlist.source
    try:
        raw = Path(path).read_text(encoding="utf-8", errors="replace").splitlines()
    except OSError as exc:
        raise NetlistError(f"cannot read netlist {path!r}: {exc.strerror or exc}") from exc
    for s in libs:
        try:
            _, line, _, _ = _pick_lib(netlist, s.target)
        except CornerApplyError as exc:
            raise CornerApplyError(str(exc), s) from exc
        m = _LIB_LINE.match(raw[line - 1])
        if m is None:
            raise CornerApplyError(f"{path}:{line}: cannot find the section word of this .lib line", s)
        raw[line - 1] = m["head"] + s.value + raw[line - 1][m.end("section"):]
    try:
        return parse_text("\n".join(raw) + "\n", source=path, base_dir=os.path.dirname(path))
    except NetlistError as exc:
        raise CornerApplyError(str(exc), libs[0] if len(libs) == 1 else None) from exc


def _set_param(netlist_statements: tuple, name: str, value: str) -> tuple[tuple, bool]:
    shown = value if re.fullmatch(r"[\w.+-]+", value) else "{" + value.strip("{}") + "}"
    pat = re.compile(rf"(?P<pre>(?:^|[\s,]){re.escape(name)}\s*=\s*)(?P<val>\{{[^}}]*\}}|'[^']*'|\"[^\"]*\"|[^\s,]+)", re.IGNORECASE)
    found = False
    out = []
    for s in netlist_statements:
        if isinstance(s, Directive) and s.keyword == ".param" and pat.search(s.text):
            found = True
            s = replace(s, text=pat.sub(lambda m: m["pre"] + shown, s.text))
        out.append(s)
    return tuple(out), found


def _set_supply(statements: tuple, setting: Setting) -> tuple[tuple, bool]:
    key, volts = setting.target.lower(), setting.value
    out, found = [], False
    for s in statements:
        if isinstance(s, Element) and s.key == key:
            if s.kind != "V":
                raise CornerApplyError(f"{s.location}: {s.name} is not a voltage source; a supply setting needs a V element", setting)
            toks = list(s.tokens)
            rest = 2
            if len(toks) > rest and toks[rest].lower() == "dc":
                if len(toks) > rest + 1:
                    toks[rest + 1] = volts
                else:
                    toks.append(volts)
            elif len(toks) > rest and toks[rest].split("(")[0].lower() not in _SOURCE_WORDS:
                toks[rest] = volts
            else:
                toks[rest:rest] = ["dc", volts]
            s = replace(s, tokens=tuple(toks))
            found = True
        out.append(s)
    return tuple(out), found


def _set_temp(statements: tuple, celsius: str, where: SourceLocation) -> tuple:
    temp_opt = re.compile(r"(?:^|\s)temp\s*=\s*\S+", re.IGNORECASE)
    out = []
    for s in statements:
        if isinstance(s, Directive) and s.keyword == ".temp":
            continue
        if isinstance(s, Directive) and s.keyword in (".option", ".options", ".opt") and temp_opt.search(s.text):
            s = replace(s, text=temp_opt.sub("", s.text))
        out.append(s)
    out.append(Directive(".temp", f".temp {celsius}", where))
    return tuple(out)


def apply_settings(netlist: Netlist | str, settings: tuple[Setting, ...], *, origin: SourceLocation | None = None) -> Netlist:
    """The netlist with the settings applied (the ``netlist`` setting is the caller's business: pass that file).

    ``.lib`` sections: the top file is read again with the section word of that line replaced.
    ``.param NAME``: every top-level definition of NAME gets the value. ``supply`` NAME: the DC value
    of the top-level voltage source NAME. ``temp``: any ``.temp`` (and ``temp=`` option) is dropped
    and ``.temp VALUE`` added. CornerApplyError when the netlist has no such line, parameter or source.
    """
    base = parse_file(netlist) if isinstance(netlist, str) else netlist
    libs = tuple(s for s in settings if s.kind == "lib")
    nl = _with_libs(base, libs)
    statements = nl.statements
    where = origin or SourceLocation("<corner>", 1)
    for s in settings:
        if s.kind == "param":
            statements, found = _set_param(statements, s.target, s.value)
            if not found:
                raise CornerApplyError(f"{nl.source} has no top-level '.param {s.target}=...' to change", s)
        elif s.kind == "supply":
            statements, found = _set_supply(statements, s)
            if not found:
                raise CornerApplyError(f"{nl.source} has no top-level voltage source {s.target!r}", s)
        elif s.kind == "temp":
            statements = _set_temp(statements, s.value, where)
    if statements is nl.statements:
        return nl
    return replace(nl, statements=statements, _index={})
