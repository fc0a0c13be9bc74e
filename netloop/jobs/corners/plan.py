"""Read a corner plan (TOML) into a frozen Plan: netlist, break nodes, axes, explicit corners, requirements."""

from __future__ import annotations

import math
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path

from netloop.analysis.requirements import Requirement, parse_requirements
from netloop.errors import PlanError
from netloop.jobs.measure import METHODS, Sweep

__all__ = ["AUTO", "IN_PLACE", "KINDS", "Axis", "CornerSpec", "Plan", "ProcessCorner", "Setting", "load_plan", "parse_plan", "read_plan_text"]

AUTO = "auto"
KINDS = ("netlist", "process", "lib", "include", "temp", "param", "supply", "element")  # what a setting can change, in naming order
IN_PLACE = ("temp", "param", "supply", "element")  # kinds ngspice changes on a loaded circuit (netloop.sim.Change); the others need a load
_PROCESS_KINDS = ("lib", "include")  # what a [process.NAME] table may set
_TOP_KEYS = frozenset("netlist at driver method require open_loop_rhp_poles timeout_s share_loads sweep process axes corner units regression".split())
_SWEEP_KEYS = frozenset("fmin_hz fmax_hz points_per_decade".split())


@dataclass(frozen=True, slots=True)
class Setting:
    """One change a corner makes to the netlist.

    kind     "netlist" (value: a path), "process" (value: the name of a [process.NAME] table),
             "lib" (value: a section; target: the .lib line, by its file or its section as written, "" for the only one),
             "include" (target: the corner word as the netlist's include paths write it; value: the word that replaces it),
             "temp" (value: degrees C as text), "param" (target: the .param name), "supply" (target: a V source),
             "element" (target: a top-level resistor, capacitor or inductor; value: its value, a number),
             "seed" (value: ngspice's random seed, a whole number: a statistical sample's, netloop.jobs.statistics;
             never written in a plan)
    """

    kind: str
    target: str
    value: str

    @property
    def label(self) -> str:
        """How the setting reads in a corner name."""
        if self.kind == "netlist":
            return Path(self.value).stem
        if self.kind in ("lib", "include", "process"):
            return self.value
        if self.kind == "temp":
            return f"{self.value}C"
        if self.kind == "supply":
            return f"{self.target}={self.value}V"
        if self.kind == "seed":
            return f"seed={self.value}"
        return f"{self.target}={self.value}"


@dataclass(frozen=True, slots=True)
class Axis:
    """One axis of the product: every value of one setting, and the plan line that named it."""

    kind: str
    target: str
    values: tuple[str, ...]
    line: int


@dataclass(frozen=True, slots=True)
class CornerSpec:
    """One explicit corner of the plan's [[corner]] list."""

    name: str  # "" when the plan gives none: named from its settings
    settings: tuple[Setting, ...]
    line: int
    setting_lines: tuple[int, ...] = ()  # the plan line of each setting


@dataclass(frozen=True, slots=True)
class ProcessCorner:
    """A named process corner of the plan's [process.NAME] tables: the section of each .lib line and the corner
    word of the include paths it switches together; ``process = "NAME"`` in a corner or an axis selects it."""

    name: str
    settings: tuple[Setting, ...]  # kinds "lib" and "include" only
    line: int  # the [process.NAME] table's line
    setting_lines: tuple[int, ...] = ()


@dataclass(frozen=True, slots=True)
class Plan:
    """A corner plan as read: paths are absolute, requirements parsed, nothing simulated yet."""

    path: str  # the plan file ("<string>" for text)
    netlist: str  # the default netlist (absolute path)
    at: tuple[str, ...]  # break nodes; ("auto",) to measure every loop netloop finds
    driver: str | None
    method: str
    requirements: tuple[Requirement, ...]
    open_loop_rhp_poles: int | None
    timeout_s: float
    sweep: Sweep
    axes: tuple[Axis, ...]  # combined as a product
    corners: tuple[CornerSpec, ...]  # explicit list, run after the product
    text: str  # the plan's text, for finding lines of semantic errors
    processes: tuple[ProcessCorner, ...] = ()  # the [process.NAME] tables, in plan order
    share_loads: bool = True  # corners that differ only in temp, supply, .param and element values share a loaded circuit
    units: tuple[tuple[str, str], ...] = ()  # [units]: a setting's unit on maps ("iload", "A")
    limits: tuple = ()  # [regression]: netloop.jobs.runs.Limit, how much worse than a baseline a figure may get
    baseline: str = ""  # [regression] baseline: the results file to compare with (absolute path), "" for none

    def process(self, name: str) -> ProcessCorner | None:
        """The [process.NAME] table called ``name``."""
        return next((p for p in self.processes if p.name == name), None)

    def line_of(self, *keys: str) -> int:
        """The plan line of a key (see `find_line`)."""
        return find_line(self.text, *keys)

    def line_of_setting(self, setting: Setting, corner_line: int) -> int:
        """The plan line that asked for a setting: its [[corner]] key, else its axis, else ``corner_line``."""
        for spec in (*self.corners, *self.processes):
            if spec.line == corner_line or spec in self.processes:
                for s, ln in zip(spec.settings, spec.setting_lines):
                    if s == setting:
                        return ln
        for axis in self.axes:
            if (axis.kind, axis.target) == (setting.kind, setting.target) and setting.value in axis.values:
                return axis.line
        return corner_line

    def error(self, message: str, *keys: str, line: int | None = None) -> PlanError:
        """A PlanError at the line of a key: "plan.toml:12: message"."""
        return PlanError(f"{self.path}:{line if line is not None else self.line_of(*keys)}: {message}")


def find_line(text: str, *keys: str) -> int:
    """The 1-based line where the last of ``keys`` is assigned (after the earlier keys' lines); 1 if not found.

    Keys are matched as written at the start of a line (``param.cc =``, ``"cc" =``) or as a
    table header (``[axes]``, ``[[corner]]``); a dotted key also matches its first part.
    """
    lines = text.splitlines()
    start = 0
    found = 1
    for key in keys:
        pat = re.compile(rf"^\s*(\[\[?\s*)?[\"']?{re.escape(key)}[\"']?\s*(=|\.|\]|$)", re.IGNORECASE)
        for i in range(start, len(lines)):
            if pat.match(lines[i]):
                found, start = i + 1, i + 1
                break
    return found


def _where(path: str, text: str, *keys: str) -> str:
    return f"{path}:{find_line(text, *keys)}"


def _as_text(value: object, where: str, what: str) -> str:
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        raise PlanError(f"{where}: {what} must be a number or a string, got {value!r}")
    if isinstance(value, float):
        if not math.isfinite(value):
            raise PlanError(f"{where}: {what} must be finite, got {value!r}")
        return repr(value)
    text = str(value).strip()
    if not text:
        raise PlanError(f"{where}: {what} is empty")
    return text


def _number_text(value: object, where: str, what: str) -> str:
    from netloop.netlist import parse_value

    text = _as_text(value, where, what)
    try:
        number = parse_value(text)
    except Exception as exc:  # noqa: BLE001 - parse_value raises ValueError or NetlistError
        raise PlanError(f"{where}: {what} must be a number such as 3.3 or 1.8 (SI suffixes allowed), got {value!r}") from exc
    if not math.isfinite(number):
        raise PlanError(f"{where}: {what} must be finite, got {value!r}")
    return text


def _values(raw: object, where: str, what: str) -> tuple:
    items = tuple(raw) if isinstance(raw, list) else (raw,)
    if not items:
        raise PlanError(f"{where}: {what} has no values; give a list such as [\"tt\", \"ss\"]")
    return items


def _settings(table: dict, path: str, text: str, section: tuple[str, ...], many: bool,
              kinds: tuple[str, ...] | None = None) -> list[tuple[Setting | tuple, int]]:
    """Settings (or axes, with ``many``) from an [axes], [[corner]] or [process.NAME] table (``kinds``: the kinds
    it may hold); (item, line) pairs in key order."""
    out: list = []
    for key, raw in table.items():
        where = _where(path, text, *section, key)
        line = find_line(text, *section, key)
        kind = key.lower()
        if kind == "name" and not many:
            continue
        if kinds is not None and kind not in kinds:
            raise PlanError(f"{where}: a process corner sets {' and '.join(kinds)} only, not {key!r}; other settings belong in [axes] or [[corner]]")
        if kind in ("lib", "include", "param", "supply", "element") and isinstance(raw, dict):
            targets = raw.items()
        elif kind in ("netlist", "temp", "lib", "process"):
            targets = (("", raw),)
        elif kind == "include":
            example = '["tt", "ss"]' if many else '"ss"'
            raise PlanError(f"{where}: include needs the corner word the netlist's include paths hold, e.g. include.tt = {example}")
        elif kind in ("param", "supply", "element"):
            name, values = ("cl", '["1p", "3p"]' if many else '"3p"') if kind == "element" else ("vdd", "[3.0, 3.3]" if many else "3.0")
            raise PlanError(f"{where}: {key} needs a name, e.g. {key}.{name} = {values}")
        else:
            raise PlanError(f"{where}: unknown setting {key!r}; expected one of {', '.join(KINDS)}")
        key_line = line
        for target, value in targets:
            what = f"{key}.{target}" if target else key
            dotted = find_line(text, *section, what) if target else key_line
            line = dotted if dotted > find_line(text, *section) and dotted >= key_line else key_line  # lib.typical = ... on its own line
            where = f"{path}:{line}"
            if isinstance(value, dict):
                raise PlanError(f"{where}: {what} must be {'a list of values' if many else 'a value'}, not a table")
            values = _values(value, where, what) if many else (value,)
            if not many and isinstance(value, list):
                raise PlanError(f"{where}: {what} takes one value in a [[corner]]; lists belong in [axes]")
            texts = []
            for v in values:
                if kind in ("temp", "supply", "element"):
                    texts.append(_number_text(v, where, what))
                elif kind == "netlist":
                    p = _as_text(v, where, what)
                    base = Path(path).parent if path != "<string>" else Path.cwd()
                    texts.append(str((base / p).resolve()))
                else:
                    texts.append(_as_text(v, where, what))
            if len(set(texts)) != len(texts):
                raise PlanError(f"{where}: {what} lists a value twice")
            keep_case = kind in ("lib", "include")  # file names and include paths are case-sensitive
            if many:
                out.append((Axis(kind, target if keep_case else target.lower(), tuple(texts), line), line))
            else:
                out.append((Setting(kind, target if keep_case else target.lower(), texts[0]), line))
    return out


def parse_plan(text: str, path: str = "<string>", *, extra: frozenset[str] = frozenset()) -> Plan:
    """Read plan text; relative paths resolve against the plan's folder. PlanError with file:line otherwise.

    ``extra``: top-level keys another job reads from the same file (``samples`` for netloop.jobs.statistics); the
    Plan leaves them out."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        line = getattr(exc, "lineno", None)  # Python 3.14 adds lineno/colno; earlier ones say "(at line L, column C)"
        found = re.search(r"\(at line (\d+), column (\d+)\)", str(exc))
        if line is None and found:
            line = int(found[1])
        if line is None and "at end of document" in str(exc):
            line = max(text.count("\n") + (0 if text.endswith("\n") else 1), 1)  # the last line of the plan
        message = re.sub(r"\s*\(at line \d+, column \d+\)", "", getattr(exc, "msg", str(exc)))
        column = f", column {found[2]}" if found else ""
        where = f"{path}:{line}" if line else path
        raise PlanError(f"{where}: not valid TOML: {message}{column}") from exc
    for key in data:
        if key == "samples" and key not in extra:
            raise PlanError(f"{_where(path, text, key)}: [samples] makes this a statistical plan: run it with "
                            "'netloop yield PLAN' (netloop corners runs plans without [samples])")
        if key not in _TOP_KEYS | extra:
            raise PlanError(f"{_where(path, text, key)}: unknown key {key!r}; expected one of {', '.join(sorted(_TOP_KEYS))}")
    base = Path(path).parent if path != "<string>" else Path.cwd()
    if "netlist" not in data or not isinstance(data["netlist"], str):
        raise PlanError(f"{_where(path, text, 'netlist')}: the plan needs netlist = \"FILE\" (relative to the plan)")
    netlist = str((base / data["netlist"]).resolve())
    at_raw = data.get("at", AUTO)
    at = tuple(at_raw) if isinstance(at_raw, list) else (at_raw,)
    if not at or not all(isinstance(a, str) and a.strip() for a in at):
        raise PlanError(f"{_where(path, text, 'at')}: at must be a node name, a list of node names, or \"auto\"")
    at = tuple(a.strip().lower() for a in at)
    if AUTO in at and len(at) > 1:
        raise PlanError(f"{_where(path, text, 'at')}: \"auto\" measures every loop; do not list nodes with it")
    method = data.get("method", "tian")
    if method not in METHODS:
        raise PlanError(f"{_where(path, text, 'method')}: method must be one of {', '.join(METHODS)}, got {method!r}")
    req_raw = data.get("require", [])
    req_list = req_raw if isinstance(req_raw, list) else [req_raw]
    try:
        requirements = parse_requirements([str(r) for r in req_list])
    except PlanError as exc:
        raise PlanError(f"{_where(path, text, 'require')}: {exc}") from exc
    rhp = data.get("open_loop_rhp_poles")  # None: read from each corner's data
    if rhp is not None and (not isinstance(rhp, int) or isinstance(rhp, bool) or rhp < 0):
        raise PlanError(f"{_where(path, text, 'open_loop_rhp_poles')}: open_loop_rhp_poles must be a whole number 0 or more")
    timeout = data.get("timeout_s", 600.0)
    if isinstance(timeout, bool) or not isinstance(timeout, (int, float)) or not timeout > 0:
        raise PlanError(f"{_where(path, text, 'timeout_s')}: timeout_s must be a positive number of seconds")
    driver = data.get("driver")
    if driver is not None and not isinstance(driver, str):
        raise PlanError(f"{_where(path, text, 'driver')}: driver must be text such as \"m6.d\"")
    sweep = _sweep(data.get("sweep", {}), path, text)
    share = data.get("share_loads", True)
    if not isinstance(share, bool):
        raise PlanError(f"{_where(path, text, 'share_loads')}: share_loads must be true or false")
    processes = _processes(data.get("process", {}), path, text)
    axes_raw = data.get("axes", {})
    if not isinstance(axes_raw, dict):
        raise PlanError(f"{_where(path, text, 'axes')}: axes must be a table ([axes])")
    axes = tuple(a for a, _ in _settings(axes_raw, path, text, ("axes",), many=True))
    corners_raw = data.get("corner", [])
    if not isinstance(corners_raw, list) or not all(isinstance(c, dict) for c in corners_raw):
        raise PlanError(f"{_where(path, text, 'corner')}: corners are tables written [[corner]]")
    corners = []
    for i, table in enumerate(corners_raw):
        section = ("corner",) * (i + 1)
        line = find_line(text, *section)
        name = table.get("name", "")
        if not isinstance(name, str):
            raise PlanError(f"{_where(path, text, *section, 'name')}: a corner's name must be text")
        pairs = _settings(table, path, text, section, many=False)
        corners.append(CornerSpec(name.strip(), tuple(s for s, _ in pairs), line, tuple(ln for _, ln in pairs)))
    names = {p.name for p in processes}
    for kind, values, line in [*((a.kind, a.values, a.line) for a in axes),
                               *((s.kind, (s.value,), ln) for c in corners for s, ln in zip(c.settings, c.setting_lines))]:
        unknown = [v for v in values if kind == "process" and v not in names]
        if unknown:
            known = ", ".join(sorted(names)) or "none: add [process.NAME] tables"
            raise PlanError(f"{path}:{line}: no process corner named {unknown[0]!r} (the plan's process corners: {known})")
    units = _units(data.get("units", {}), _where(path, text, "units"))
    from netloop.jobs.runs.limits import regression_table

    limits, baseline = regression_table(data.get("regression", {}), _where(path, text, "regression"), str(base))
    return Plan(path, netlist, at, driver, method, requirements, rhp, float(timeout), sweep, axes, tuple(corners), text,
                processes, share, units, limits, baseline)


def _units(raw: object, where: str) -> tuple[tuple[str, str], ...]:
    """[units]: setting name (as in [axes], e.g. iload or param.iload) -> the unit its values are in, for maps."""
    flat = {}
    for key, value in (raw.items() if isinstance(raw, dict) else ()):
        pairs = value.items() if isinstance(value, dict) else (("", value),)  # param.iload = "A" is a nested table
        flat.update({f"{key}.{k}" if k else key: v for k, v in pairs})
    if not isinstance(raw, dict) or not all(isinstance(v, str) for v in flat.values()):
        raise PlanError(f"{where}: units must be a table of texts, e.g. [units] iload = \"A\"")
    return tuple((k.lower(), v.strip()) for k, v in flat.items())


def _processes(raw: object, path: str, text: str) -> tuple[ProcessCorner, ...]:
    """The [process.NAME] tables: each a named set of lib and include settings with one value each."""
    if not isinstance(raw, dict) or not all(isinstance(t, dict) for t in raw.values()):
        raise PlanError(f"{_where(path, text, 'process')}: process corners are tables: [process.NAME] with lib.LINE = \"SECTION\" "
                        "(and include.WORD = \"WORD\") keys")
    out = []
    for name, table in raw.items():
        header = re.search(rf"^[ \t]*\[[ \t]*process\.[\"']?{re.escape(name)}[\"']?[ \t]*\]", text, flags=re.MULTILINE)  # not \s: a blank line above is not its line
        section = (f"process.{name}",) if header else ("process", name)
        line = text.count("\n", 0, header.start()) + 1 if header else find_line(text, *section)
        if not table:
            raise PlanError(f"{path}:{line}: process corner {name!r} sets nothing; give it lib.LINE = \"SECTION\" keys")
        pairs = _settings(table, path, text, section, many=False, kinds=_PROCESS_KINDS)
        out.append(ProcessCorner(name, tuple(s for s, _ in pairs), line, tuple(ln for _, ln in pairs)))
    return tuple(out)


def _sweep(raw: object, path: str, text: str) -> Sweep:
    if not isinstance(raw, dict):
        raise PlanError(f"{_where(path, text, 'sweep')}: sweep must be a table ([sweep])")
    kwargs: dict = {}
    for key, value in raw.items():
        where = _where(path, text, "sweep", key)
        if key not in _SWEEP_KEYS:
            raise PlanError(f"{where}: unknown sweep key {key!r}; expected one of {', '.join(sorted(_SWEEP_KEYS))}")
        if key == "points_per_decade":
            if not isinstance(value, int) or isinstance(value, bool):
                raise PlanError(f"{where}: points_per_decade must be a whole number")
            kwargs[key] = value
        else:
            from netloop.analysis.quantities import parse_quantity

            try:
                number = parse_quantity(_as_text(value, where, key), "hz")
            except PlanError as exc:
                raise PlanError(f"{where}: {key}: {exc}") from exc
            kwargs[key] = number
            kwargs[key.replace("_hz", "_given")] = True
    try:
        return Sweep(**kwargs)
    except Exception as exc:  # noqa: BLE001 - Sweep raises NetloopError on bad limits
        raise PlanError(f"{_where(path, text, 'sweep')}: {exc}") from exc


def read_plan_text(path: str | Path) -> tuple[str, str]:
    """(text, absolute path) of a plan file; PlanError when it cannot be read."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise PlanError(f"cannot read plan {str(path)!r}: {exc.strerror or exc}") from exc
    except UnicodeDecodeError as exc:
        raise PlanError(f"cannot read plan {str(path)!r}: not UTF-8 text (byte {exc.start}); a plan is a TOML file") from exc
    return text, str(p.resolve())


def load_plan(path: str | Path) -> Plan:
    """Read a plan file; PlanError (file:line) when it cannot be read."""
    return parse_plan(*read_plan_text(path))
