"""Physical lines to logical statements: comments stripped, ``+`` continuations joined, ``.control`` blocks kept whole."""

from __future__ import annotations

import re

__all__ = ["LogicalLine", "logical_lines", "tokenize", "token_columns"]

# (text, line number, is_raw_block): text is one statement, continuations joined with a space.
LogicalLine = tuple[str, int, bool]

_EQ = re.compile(r"\s*=\s*")
_DOLLAR = re.compile(r"(?:^|\s)\$")  # as ngspice 39 reads it: a $ after a space starts a comment, whatever follows


def _strip_inline(s: str) -> str:
    if ";" in s:
        s = s[: s.index(";")]
    if "$" in s:
        m = _DOLLAR.search(s)
        if m is not None:
            s = s[: m.start()]
    return s.strip()


_CONT = re.compile(r"^[ \t]*\+", re.MULTILINE)
_CONTROL = re.compile(r"^[ \t]*\.control", re.MULTILINE | re.IGNORECASE)


def _kind(lines: list[str], start: int) -> str:
    """"plain" when no line continues another, carries an inline comment or opens a ``.control`` block;
    "control" when a ``.control`` block may be there; else "joined" (continuations, inline comments)."""
    text = "\n".join(lines[start:])
    if ".control" in text.lower() and _CONTROL.search(text) is not None:
        return "control"
    if ";" in text or "$" in text or ("+" in text and _CONT.search(text)):
        return "joined"
    return "plain"


def _joined(lines: list[str], start: int) -> list[LogicalLine]:
    """logical_lines of a file without ``.control`` blocks: each statement's continuations are gathered and joined
    once (a model card of hundreds of ``+`` lines is not copied once per line, as adding to a string would)."""
    out: list[list] = []
    parts: list[str] = []
    for i, s in enumerate([x.strip() for x in lines[start:]], start + 1):
        if not s or s[0] == "*":
            continue
        if ";" in s or "$" in s:
            s = _strip_inline(s)
            if not s:
                continue
        if s[0] == "+" and out:
            rest = s[1:].strip()
            if rest:
                parts.append(rest)
            continue
        if len(parts) > 1:
            out[-1][0] = " ".join(parts)
        parts = [s]
        out.append([s, i, False])  # a continuation with nothing to continue stays: the reader reports it
    if len(parts) > 1:
        out[-1][0] = " ".join(parts)
    return [(t, ln, raw) for t, ln, raw in out]


def logical_lines(lines: list[str], start: int = 0) -> list[LogicalLine]:
    """Join one file's lines (``lines[start:]``) into statements with the number of their first line.

    ``*`` lines and blank lines are dropped (also between a statement and its continuation);
    ``;`` and a ``$`` after a space or tab start inline comments; a ``.control`` ... ``.endc`` block becomes one raw
    statement holding its lines verbatim, since nothing inside it is netlist syntax.
    """
    kind = _kind(lines, start)
    if kind == "plain":
        stripped = [x.strip() for x in lines[start:]]
        return [(s, i, False) for i, s in enumerate(stripped, start + 1) if s and s[0] != "*"]
    if kind == "joined":
        return _joined(lines, start)
    out: list[list] = []
    append = out.append
    i = start
    n = len(lines)
    while i < n:
        s = lines[i].strip()
        i += 1
        if not s:
            continue
        c = s[0]
        if c == "*":
            continue
        if ";" in s or "$" in s:
            s = _strip_inline(s)
            if not s:
                continue
        if c == "+":
            if out and not out[-1][2]:
                rest = s[1:].strip()
                if rest:
                    out[-1][0] = out[-1][0] + " " + rest
                continue
            append([s, i, False])  # a stray continuation: reported by the reader
            continue
        if c == "." and s[:8].lower() == ".control":
            first = i
            block = [lines[i - 1].rstrip("\r\n")]
            while i < n:
                raw = lines[i].rstrip("\r\n")
                i += 1
                block.append(raw)
                if raw.strip()[:5].lower() == ".endc":
                    break
            append(["\n".join(block), first, True])
            continue
        append([s, i, False])
    return [(t, ln, raw) for t, ln, raw in out]


def _group(s: str) -> list[str]:
    """Whitespace split that keeps ``{...}`` and ``'...'`` groups (which may hold spaces) in one token."""
    toks: list[str] = []
    cur: list[str] = []
    depth = 0
    quote = False
    for ch in s:
        if quote:
            cur.append(ch)
            if ch == "'":
                quote = False
            continue
        if ch == "'":
            quote = True
            cur.append(ch)
        elif ch == "{":
            depth += 1
            cur.append(ch)
        elif ch == "}":
            depth = max(depth - 1, 0)
            cur.append(ch)
        elif depth == 0 and ch.isspace():
            if cur:
                toks.append("".join(cur))
                cur = []
        else:
            cur.append(ch)
    if cur:
        toks.append("".join(cur))
    return toks


def _merge_eq(toks: list[str]) -> list[str]:
    out: list[str] = []
    pending = False
    for t in toks:
        if out and (pending or t[0] == "="):
            out[-1] += t
        else:
            out.append(t)
        pending = t[-1] == "=" and t[0] not in "{'"
    return out


def tokenize(s: str) -> list[str]:
    """Split a statement into tokens; ``key = value`` becomes ``key=value``; brace and quote groups stay whole."""
    if "{" not in s and "'" not in s:
        if "=" in s:
            s = _EQ.sub("=", s)
        return s.split()
    toks = _group(s)
    if "=" in s:
        toks = _merge_eq(toks)
    return toks


def token_columns(s: str) -> list[int]:
    """1-based start column of each raw whitespace-separated piece of ``s`` (for error carets)."""
    cols = []
    prev_space = True
    for i, ch in enumerate(s):
        if ch.isspace():
            prev_space = True
        elif prev_space:
            cols.append(i + 1)
            prev_space = False
    return cols
