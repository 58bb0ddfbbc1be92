# simkit: one-command set-up.  `make demo` and `make test` each build everything they need.
PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: all setup ngspice demo test lint netlists bench clean

all: test

ngspice:
	@bash scripts/ensure-ngspice.sh

$(STAMP): pyproject.toml
	@bash scripts/ensure-ngspice.sh
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[dev]'
	@touch $(STAMP)

setup: $(STAMP)

demo: setup
	$(BIN)/simkit demo --out results

test: setup
	$(BIN)/ruff check simkit tests bench
	@bash scripts/ensure-chromium.sh && $(BIN)/python -m pytest -q --ngspice required

lint: setup
	$(BIN)/ruff check simkit tests bench

# Regenerate the golden decks of the shipped examples (tests fail when they are stale).
netlists: setup
	$(BIN)/python -m simkit.goldens write netlists

bench: setup
	$(BIN)/python bench/bench_run.py

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache .ruff_cache
