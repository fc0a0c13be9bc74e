"""Decks shared by several sim tests (imported by name; pytest puts this folder on sys.path)."""

from __future__ import annotations

# KCL at n: v(n)/1k + (v(n) > 0.5 ? 2 mA : -2 mA) = 0 has no solution: v > 0.5 needs v = -2 V,
# v <= 0.5 needs v = +2 V. Nothing can make this converge.
NO_SOLUTION = """relay with no solution
b1 n 0 i = v(n) > 0.5 ? 2m : -2m
r1 n 0 1k
v1 in 0 dc 0 ac 1
r2 in n 1k
"""
