# Two entry points do the whole set-up on a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
DEMO   := $(VENV)/.demo-installed
TESTED := $(VENV)/.test-installed
WORK   ?= build/demo
# test-floor: a separate venv with every dependency at the floor pyproject.toml declares
FLOOR        ?= build/floor
FLOOR_PYTHON ?= python3.11

.PHONY: demo test test-floor lint bench samples clean

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

$(FLOOR)/constraints.txt: pyproject.toml tests/floor_constraints.py
	mkdir -p $(FLOOR)
	$(PYTHON) tests/floor_constraints.py pyproject.toml > $@

$(FLOOR)/.installed: $(FLOOR)/constraints.txt
	rm -rf $(FLOOR)/venv
	$(FLOOR_PYTHON) -m venv $(FLOOR)/venv
	$(FLOOR)/venv/bin/python -m pip install --quiet --upgrade pip
	$(FLOOR)/venv/bin/python -m pip install --quiet -c $(FLOOR)/constraints.txt -e ".[test]"
	$(FLOOR)/venv/bin/python -m pip freeze --exclude-editable > $(FLOOR)/installed.txt
	touch $@

## test-floor: lint and the whole suite with every dependency at its declared floor (slow;
## see DEVELOPERS.md, "Tests"); the versions installed are listed in build/floor/installed.txt
test-floor: $(FLOOR)/.installed
	$(FLOOR)/venv/bin/ruff check .
	$(FLOOR)/venv/bin/ruff format --check .
	$(FLOOR)/venv/bin/python -m pytest -n 2 -q

lint: $(TESTED)
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .

## samples: regenerate the committed sample archives (see samples/README.md)
samples: $(DEMO)
	bash samples/make-samples.sh $(BIN)

## bench: the performance record, docs/performance.md (about 10 minutes; BENCH=--quick for a
## look at development sizes; BENCH=--all for every benchmark and calibration, hours)
BENCH ?=
bench: $(TESTED)
	$(BIN)/python -m bench $(BENCH)

clean:
	rm -rf $(VENV) build .pytest_cache .ruff_cache .hypothesis
