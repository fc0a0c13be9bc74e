"""Helpers for netlist tests: run real ngspice on a deck for its operating point or its expanded listing."""

from __future__ import annotations

import subprocess
from pathlib import Path

import pytest


def _run_ngspice(deck: str, folder: Path, control: str) -> str:
    body = deck.rstrip()
    if body.lower().endswith(".end"):
        body = body[:-4].rstrip()
    path = folder / "run.cir"
    path.write_text(f"{body}\n.control\n{control}\n.endc\n.end\n")
    proc = subprocess.run(["ngspice", "-b", str(path)], capture_output=True, text=True, timeout=60, cwd=folder)
    return proc.stdout + proc.stderr


def ngspice_op(deck: str, folder: Path) -> dict[str, float]:
    """Every node voltage and branch current of ngspice's own ``op`` (``print all``)."""
    out = _run_ngspice(deck, folder, "op\nprint all")
    values: dict[str, float] = {}
    lines = out.splitlines()
    start = next((i for i, line in enumerate(lines) if line.startswith("No. of Data Rows")), len(lines))
    for line in lines[start + 1 :]:
        name, eq, value = line.partition(" = ")
        if not eq:
            break  # the end of the print all block
        if name and " " not in name.strip():
            try:
                values[name.strip().lower()] = float(value.split()[0])
            except ValueError:
                continue
    if not values:
        raise AssertionError(f"ngspice gave no operating point:\n{out}")
    return values


def ngspice_listing(deck: str, folder: Path) -> list[str]:
    """The element lines of ngspice's expanded listing (``listing e``), lower-case, line numbers dropped."""
    out = _run_ngspice(deck, folder, "listing e")
    cards = []
    for line in out.splitlines():
        head, colon, card = line.partition(" : ")
        if colon and head.strip().isdigit():
            card = card.strip().lower()
            if card and card[0] not in ".*":
                cards.append(card)
    return cards


@pytest.fixture
def op_of():
    return ngspice_op


@pytest.fixture
def listing_of():
    return ngspice_listing
