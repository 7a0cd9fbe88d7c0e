# The two set-up commands of the README. Each creates .venv when it is missing and installs
# the project from its own files, so a fresh machine needs nothing else.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed-$(shell cat pyproject.toml | cksum | cut -d' ' -f1)

.PHONY: demo test bench install clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP): $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install --quiet -e '.[test]'
	rm -f $(VENV)/.installed-*
	touch $(STAMP)

install: $(STAMP)

demo: $(STAMP)
	$(BIN)/thermorc demo --out demo_out

test: $(STAMP)
	$(BIN)/python -m pytest -q

bench: $(STAMP)
	$(BIN)/python -m pytest -q -m benchmark tests/benchmarks -s

clean:
	rm -rf $(VENV) demo_out build *.egg-info
