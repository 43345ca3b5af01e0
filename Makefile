# Two commands for a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
# numba's on-disk cache (esda kernels) lives in the venv, so the compile is paid once per machine.
export NUMBA_CACHE_DIR := $(CURDIR)/$(VENV)/numba-cache
export MPLBACKEND := Agg

.PHONY: demo test lint clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(VENV)/.installed: $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install --quiet -e .
	touch $@

$(VENV)/.installed-test: $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install --quiet -e ".[test]"
	touch $@ $(VENV)/.installed

demo: $(VENV)/.installed
	$(BIN)/marchland demo --out out --overwrite

test: $(VENV)/.installed-test
	$(BIN)/python -m pytest -n 2

lint: $(VENV)/.installed-test
	$(BIN)/ruff check src tests benchmarks
	$(BIN)/ruff format --check src tests benchmarks

clean:
	rm -rf $(VENV) out
