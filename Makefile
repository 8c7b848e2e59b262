# The two set-up commands a new user runs are `make demo` and `make test`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: demo test lint bench clean venv

$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

venv: $(STAMP)

## Build the demo cube on the embedded local store (if missing) and serve it.
demo: $(STAMP)
	$(BIN)/alveary demo

## Lint, then run the whole suite (starts its own S3-protocol server and uvicorn on 127.0.0.1).
test: $(STAMP)
	$(BIN)/ruff check service tests
	$(BIN)/ruff format --check service tests
	$(BIN)/python -m pytest -q

lint: $(STAMP)
	$(BIN)/ruff check service tests
	$(BIN)/ruff format --check service tests

## Benchmarks (not part of make test): prints ratios measured in this run.
bench: $(STAMP)
	$(BIN)/python tests/benchmarks/run.py

clean:
	rm -rf $(VENV) .pytest_cache .hypothesis build *.egg-info
