# Everything a fresh machine needs: `make demo` and `make test` create .venv from pyproject.toml.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP_RUN := $(VENV)/.installed-run
STAMP_TEST := $(VENV)/.installed-test

.PHONY: demo test bench clean venv

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install -q --upgrade pip

$(STAMP_RUN): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install -q -e .
	touch $@

$(STAMP_TEST): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install -q -e '.[test]'
	touch $@ $(STAMP_RUN)

venv: $(STAMP_RUN)

demo: $(STAMP_RUN)
	$(BIN)/cfsweep demo --out demo-output

test: $(STAMP_TEST)
	$(BIN)/python -m pytest -q -n 2 tests

bench: $(STAMP_TEST)
	$(BIN)/python bench/run.py --quick

clean:
	rm -rf $(VENV) demo-output build *.egg-info
