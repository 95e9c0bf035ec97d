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
	$(BIN)/python -m pytest kernel_core widgets dashboards tests

bench: $(VENV)/.installed-test
	PYTHONPATH=. $(BIN)/python benchmarks/bench_design.py
	PYTHONPATH=. $(BIN)/python benchmarks/bench_fit.py

lint: $(VENV)/.installed-test
	$(BIN)/ruff check .

clean:
	rm -rf $(VENV) .pytest_cache .ruff_cache *.egg-info
