# Two entry points do the whole set-up on a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
DEMO   := $(VENV)/.demo-installed
TESTED := $(VENV)/.test-installed
WORK   ?= build/demo

.PHONY: demo test lint bench samples clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(DEMO): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e ".[all]"
	touch $@

$(TESTED): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e ".[test]"
	touch $@ $(DEMO)

## demo: install, then run the main job on the bundled samples
demo: $(DEMO)
	bash samples/demo.sh $(BIN) $(WORK)

## test: install with the test extras, lint, run the whole suite
test: $(TESTED)
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .
	$(BIN)/python -m pytest -n 2 -q

lint: $(TESTED)
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .

## samples: regenerate the committed sample archives (see samples/README.md)
samples: $(DEMO)
	bash samples/make-samples.sh $(BIN)

## bench: the benchmarks under bench/ (long; results go to bench/out and docs)
bench: $(TESTED)
	$(BIN)/python -m bench

clean:
	rm -rf $(VENV) build .pytest_cache .ruff_cache .hypothesis
