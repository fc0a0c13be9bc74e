"""Expand the subcircuit hierarchy into a FlatCircuit; device-wrapper instances stay one device."""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping
from itertools import chain

from netloop.errors import NetlistError
from netloop.graph.flat import GROUND_NAMES, FlatCircuit
from netloop.netlist.devices import device_pin_roles, device_primitive
from netloop.netlist.model import Element, Netlist, Subcircuit
from netloop.netlist.reader import gc_paused

__all__ = ["flatten"]

_SLOTS2 = (0, 1)
_UPPER = {c: c.upper() for c in "RCLKVIEFGHBDMQJZSWTOUXArclkviefghbdmqjzswtouxa"}


def _nodes_of(s: Element) -> tuple[str, ...]:
    sl = s.node_slots
    k = len(sl)
    return s.tokens[:k] if (k == 0 or sl[-1] == k - 1) else tuple([s.tokens[i] for i in sl])


class _Flattener:
    def __init__(self, netlist: Netlist) -> None:
        self.glob = frozenset((*GROUND_NAMES, *netlist.globals))
        self.names: list[str] = []
        self.kinds: list[str] = []
        self.nodes: list[tuple[str, ...]] = []
        self.pins: list[tuple[str, ...]] = []
        self.originals: list[Element] = []
        self.paths: list[tuple[str, ...]] = []
        self.wrappers: list[str | None] = []
        self.instances: Counter[str] = Counter()
        self.warnings: list[str] = []
        self.instance_pins: list[tuple[tuple[str, ...], tuple[str, ...], tuple[str, ...]]] = []
        self.device_cache: dict[int, tuple[str, tuple[str, ...]] | None] = {}

    def _device(self, sub: Subcircuit) -> tuple[str, tuple[str, ...]] | None:
        key = id(sub)
        if key not in self.device_cache:
            prim = device_primitive(sub)
            self.device_cache[key] = None if prim is None else (prim.kind, device_pin_roles(sub))
        return self.device_cache[key]

    def expand_top(self, statements) -> bool:
        """Fast path for a top level without X cards (large flat netlists): whole columns at once."""
        els = [s for s in statements if type(s) is Element]
        kinds = [_UPPER[s.name[0]] for s in els]
        if "X" in kinds:
            return False
        nodes = [s.tokens[:2] if s.node_slots == _SLOTS2 else _nodes_of(s) for s in els]
        if "gnd" in chain.from_iterable(nodes):
            nodes = [tuple(["0" if n == "gnd" else n for n in t]) if "gnd" in t else t for t in nodes]
        self.names.extend([s.name.lower() for s in els])
        self.kinds.extend(kinds)
        self.nodes.extend(nodes)
        self.pins.extend([s.pins for s in els])
        self.originals.extend(els)
        self.paths.extend([()] * len(els))
        self.wrappers.extend([None] * len(els))
        return True

    def expand(self, statements, prefix: str, path: tuple[str, ...], netmap: dict | None,
               scopes: tuple[Mapping[str, Subcircuit], ...], active: tuple[str, ...]) -> None:
        glob = self.glob
        names, kinds, nodes_col, pins_col = self.names, self.kinds, self.nodes, self.pins
        originals, paths, wrappers = self.originals, self.paths, self.wrappers
        for s in statements:
            if type(s) is not Element:
                continue
            toks = s.tokens
            sl = s.node_slots
            k = len(sl)
            nodes = toks[:k] if (k == 0 or sl[-1] == k - 1) else tuple([toks[i] for i in sl])
            if netmap is not None:
                nodes = tuple([netmap.get(n) or (n if n in glob else prefix + n) for n in nodes])
            if "gnd" in nodes:  # ngspice's other name for node 0
                nodes = tuple(["0" if n == "gnd" else n for n in nodes])
            kind = s.name[0].upper()
            name = prefix + s.name.lower()
            if kind == "X":
                found = None
                for depth, scope in enumerate(scopes):
                    sub = scope.get(s.model)
                    if sub is not None:
                        found = (sub, scopes[depth:])
                        break
                if found is None:
                    self.warnings.append(f"{s.location}: {s.name}: undefined subcircuit {s.model!r}; left unexpanded")
                else:
                    sub, outer = found
                    self.instances[sub.name] += 1
                    dev = self._device(sub)
                    if dev is not None:
                        names.append(name)
                        kinds.append(dev[0])
                        nodes_col.append(nodes)
                        pins_col.append(dev[1])
                        originals.append(s)
                        paths.append(path)
                        wrappers.append(sub.name)
                        continue
                    if sub.name in active:
                        raise NetlistError(f"{s.location}: {s.name}: subcircuit {sub.name} instantiates itself (through {' -> '.join(active)})")
                    if len(sub.pins) != len(nodes):
                        raise NetlistError(f"{s.location}: {s.name}: subcircuit {sub.name} has {len(sub.pins)} pins, the card gives {len(nodes)} nodes")
                    local = sub.subcircuits
                    inner = (local, *outer) if local else outer
                    here = (*path, s.name.lower())
                    self.instance_pins.append((here, sub.pins, nodes))
                    self.expand(sub.body, name + ".", here, dict(zip(sub.pins, nodes)), inner, (*active, sub.name))
                    continue
            names.append(name)
            kinds.append(kind)
            nodes_col.append(nodes)
            pins_col.append(s.pins)
            originals.append(s)
            paths.append(path)
            wrappers.append(None)


def flatten(netlist: Netlist) -> FlatCircuit:
    """The netlist with every subcircuit instance expanded into hierarchical names.

    Internal nets become ``xa.xb.net`` and elements ``xa.xb.m1`` (lower-case); pins map to the
    parent's nets; ground (``0``, and ``gnd`` which becomes ``0`` as in ngspice) and ``.global``
    nets stay global. An X instance of a
    device-wrapper subcircuit (one transistor plus models, as process libraries write them) is
    kept as one device of that kind with the device's pin roles. An undefined subcircuit is
    left as one X element and reported in ``warnings``.
    """
    f = _Flattener(netlist)
    with gc_paused():
        if not f.expand_top(netlist.statements):
            f.expand(netlist.statements, "", (), None, (netlist.subcircuits,), ())
        return FlatCircuit(
            names=tuple(f.names),
            kinds=tuple(f.kinds),
            element_nodes=tuple(f.nodes),
            element_pins=tuple(f.pins),
            originals=tuple(f.originals),
            paths=tuple(f.paths),
            wrappers=tuple(f.wrappers),
            globals=netlist.globals,
            instance_counts=dict(sorted(f.instances.items())),
            warnings=tuple(f.warnings),
            instance_pins=tuple(f.instance_pins),
        )
