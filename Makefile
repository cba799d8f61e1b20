# Two commands do all set-up on a fresh machine: `make run` and `make test`.
PY ?= python3.11
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.install-stamp
export NUMBA_CACHE_DIR := $(CURDIR)/.numba_cache

.PHONY: run test bench clean

$(BIN)/python:
	$(PY) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

run: $(STAMP)
	$(BIN)/shockslate serve

test: $(STAMP)
	$(BIN)/python -m pytest

bench: $(STAMP)
	$(BIN)/shockslate bench

clean:
	rm -rf $(VENV) .numba_cache .pytest_cache
