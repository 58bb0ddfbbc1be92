# simkit: one-command set-up.  `make demo` and `make test` each build everything they need.
PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: all setup bytecode ngspice demo test lint netlists bench clean

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

# Byte-compile simkit's sources: an editable install does not, and where PYTHONDONTWRITEBYTECODE is set
# Python never caches them, so every simkit process (and every sweep worker) would compile them again,
# about 0.07 s each.  Quick when nothing changed.
bytecode: setup
	@$(BIN)/python -m compileall -q simkit

demo: bytecode
	$(BIN)/simkit demo --out results

test: bytecode
	$(BIN)/ruff check simkit tests bench
	@bash scripts/ensure-chromium.sh && $(BIN)/python -m pytest -q --ngspice required

lint: setup
	$(BIN)/ruff check simkit tests bench

# Regenerate the golden decks of the shipped examples (tests fail when they are stale).
netlists: setup
	$(BIN)/python -m simkit.goldens write netlists

bench: bytecode
	$(BIN)/python bench/bench_run.py

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache .ruff_cache
