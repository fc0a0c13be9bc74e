"""Tests of netloop.probe (a package so its modules can share helpers from .conftest)."""
