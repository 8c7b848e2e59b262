# The two set-up commands a new user runs are `make demo` and `make test`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed
# Quick feedback: no servers (grid, cube arithmetic, query plans, encoders, doctests).
FAST   := tests/grid tests/cube/test_cube_layout.py tests/query tests/api \
          service/alveary/grid service/alveary/cube service/alveary/query service/alveary/api

.PHONY: demo test test-fast lint bench soak clean venv

$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

venv: $(STAMP)

## Build the demo cube on the embedded local store (if missing) and serve it.
demo: $(STAMP)
	$(BIN)/alveary demo

## Style, the layer contract (import-linter) and the types (mypy).
lint: $(STAMP)
	$(BIN)/ruff check service tests
	$(BIN)/ruff format --check service tests
	$(BIN)/lint-imports
	$(BIN)/mypy

## Lint, then the whole suite (starts its own S3-protocol server and uvicorn on 127.0.0.1).
test: lint
	$(BIN)/python -m pytest -q -n auto --dist loadfile

## The tests that start no server, for quick feedback while working.
test-fast: $(STAMP)
	$(BIN)/python -m pytest -q -m "not server" $(FAST)

## Benchmarks (not part of make test): prints ratios measured in this run.
bench: $(STAMP)
	$(BIN)/python tests/benchmarks/run.py

clean:
	rm -rf $(VENV) .pytest_cache .hypothesis .mypy_cache .import_linter_cache build *.egg-info

## The heavier reliability runs on loopback (not part of make test): prints the figures.
soak: $(STAMP)
	$(BIN)/python tests/soak/run.py
