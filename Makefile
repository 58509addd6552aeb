# brayscope — the two commands a new user needs are `make demo` and `make test`.
PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: demo test lint typecheck unit bench bench-live clean venv constraints

venv: $(STAMP)

# runtime dependencies at the versions an operator installs (deploy/constraints.txt)
$(STAMP): pyproject.toml deploy/constraints.txt
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -c deploy/constraints.txt -e '.[test]'
	touch $(STAMP)

## constraints: re-resolve the runtime dependencies into deploy/constraints.txt (after editing
## pyproject.toml's dependencies; the next `make venv` installs them)
constraints:
	$(if $(wildcard $(BIN)/python),$(BIN)/python,$(PYTHON)) tools/gen_constraints.py

## demo: run the main job on the shipped example (no broker or database needed)
demo: $(STAMP)
	$(BIN)/brayscope demo $(DEMO_ARGS)

## test: lint, type-check and the whole test suite
test: lint typecheck unit

lint: $(STAMP)
	$(BIN)/ruff check models daemon tests
	$(BIN)/ruff format --check models daemon tests

typecheck: $(STAMP)
	$(BIN)/mypy models
	$(BIN)/mypy daemon

unit: $(STAMP)
	$(BIN)/pytest $(PYTEST_ARGS)

## bench: vectorised reconstruction vs a per-snapshot Cantera loop
bench: $(STAMP)
	$(BIN)/brayscope bench

## bench-live: the daemon end to end against a broker on loopback
bench-live: $(STAMP)
	$(BIN)/brayscope bench-live

clean:
	rm -rf $(VENV) .pytest_cache .mypy_cache .ruff_cache build *.egg-info
