# Two commands do all set-up on a fresh machine: `make run` and `make test`.
# `make run` installs only what the product needs; `make test` adds the test and design extras.
# Compiled kernels go to one per-user cache (~/.cache/shockslate, see solver/__init__.py) that the command line,
# the server and the tests share.
PY ?= python3.11
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.install-stamp
TEST_STAMP := $(VENV)/.test-install-stamp

.PHONY: run test bench clean

$(BIN)/python:
	$(PY) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e .
	$(BIN)/shockslate warm
	touch $(STAMP)

$(TEST_STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e '.[test,design]'
	$(BIN)/shockslate warm
	touch $(STAMP) $(TEST_STAMP)

run: $(STAMP)
	$(BIN)/shockslate serve

test: $(TEST_STAMP)
	$(BIN)/python -m pytest

bench: $(STAMP)
	$(BIN)/shockslate bench

clean:
	rm -rf $(VENV) .pytest_cache
