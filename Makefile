# padtune: every install step lives here, so a fresh clone needs nothing but Python 3.11+ and make.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
# The stamps record which install the venv holds; they are redone when pyproject or the pins change.
RUN_STAMP := $(VENV)/.stamp-run
TEST_STAMP := $(VENV)/.stamp-test

.PHONY: demo test bench lint snapshots-update clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(RUN_STAMP): pyproject.toml constraints.txt | $(BIN)/python
	$(BIN)/python -m pip install --quiet -c constraints.txt -e .
	touch $@

$(TEST_STAMP): pyproject.toml constraints.txt | $(BIN)/python
	$(BIN)/python -m pip install --quiet -c constraints.txt -e '.[test]'
	touch $@ $(RUN_STAMP)

demo: $(RUN_STAMP)
	$(BIN)/padtune demo

test: $(TEST_STAMP)
	$(BIN)/ruff check .
	$(BIN)/python -m pytest -q

bench: $(TEST_STAMP)
	$(BIN)/python tests/benchmarks/run_all.py

lint: $(TEST_STAMP)
	$(BIN)/ruff check .

snapshots-update: $(TEST_STAMP)
	$(BIN)/python -m pytest -q tests/tui tests/headless --snapshot-update

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache .ruff_cache .hypothesis
