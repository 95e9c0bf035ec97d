# levelwise developer commands. Every target creates .venv when it is missing.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
PORT ?= 8866

.PHONY: dashboard test lint bench clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(VENV)/.installed: $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install --quiet -e .
	touch $@

$(VENV)/.installed-test: $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(VENV)/.installed $@

dashboard: $(VENV)/.installed
	$(BIN)/levelwise serve --port $(PORT)

test: $(VENV)/.installed-test
	$(BIN)/ruff check .
	$(BIN)/python -m pytest tests

# Benchmarks: same-run ratios against references (tests/bench). QUICK=1 for a short run (< 2 min).
bench: $(VENV)/.installed-test
	$(BIN)/python -m tests.bench $(if $(QUICK),--quick,)

lint: $(VENV)/.installed-test
	$(BIN)/ruff check .

clean:
	rm -rf $(VENV) .pytest_cache .ruff_cache *.egg-info
