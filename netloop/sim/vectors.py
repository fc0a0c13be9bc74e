"""ngspice vector names: one spelling for nodes and branches, and checking saves against a circuit."""

from __future__ import annotations

import difflib
from collections.abc import Iterable

__all__ = ["canonical", "unknown_saves"]


def canonical(name: str) -> str:
    """``out``/``v(out)`` -> ``v(out)``; ``v1#branch``/``i(v1)`` -> ``i(v1)``; others lower-cased as they are."""
    key = "".join(name.split()).lower()
    if key.endswith("#branch") and "(" not in key:
        return f"i({key[: -len('#branch')]})"
    if key[:2] in ("v(", "i(") or key.startswith("@") or "(" in key:
        return key
    return f"v({key})"


def unknown_saves(saves: Iterable[str], circuit_vectors: Iterable[str]) -> str | None:
    """A message naming each plain v(node)/i(source) save the circuit lacks (with close names), or None."""
    known = {canonical(n) for n in circuit_vectors if not n.startswith("@")}
    problems = []
    for save in saves:
        key = canonical(save)
        if key.startswith("@") or key[:2] not in ("v(", "i(") or "," in key or key in known:
            continue
        close = difflib.get_close_matches(key, sorted(known), n=3, cutoff=0.6)
        hint = f" (did you mean {' or '.join(close)}?)" if close else ""
        problems.append(f"{save!r}{hint}")
    if not problems:
        return None
    return "the circuit has no vector " + ", ".join(problems)
