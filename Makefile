# padtune: every install step lives here, so a fresh clone needs nothing but Python 3.11+ and make.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
# The stamps record which install the venv holds; they are redone when pyproject or the pins change.
RUN_STAMP := $(VENV)/.stamp-run
TEST_STAMP := $(VENV)/.stamp-test

.PHONY: demo test bench lint snapshots-update clean firmware-harness

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

# The C library as a board on this computer (devices/firmware/harness/, see DEVELOPERS.md):
# `make firmware-harness`, then `build/firmware/pt_harness --pty`. FW_SAN=1 builds it with AddressSanitizer and
# UndefinedBehaviorSanitizer (the tests do); FW_BUILD picks the output folder.
FW_DIR := devices/firmware
FW_BUILD ?= build/firmware
FW_CC ?= cc
FW_WARN := -std=c99 -Wall -Wextra -Werror -pedantic
FW_SANITIZE := -O1 -g -fsanitize=address -fsanitize=undefined -fno-omit-frame-pointer -fno-sanitize-recover=all
FW_SANFLAGS := $(if $(filter 1,$(FW_SAN)),$(FW_SANITIZE),-O2)
HARNESS_SRC := $(FW_DIR)/harness/pt_harness.c $(wildcard $(FW_DIR)/pt_*.c)

firmware-harness: $(FW_BUILD)/pt_harness

$(FW_BUILD)/pt_harness: $(HARNESS_SRC) $(wildcard $(FW_DIR)/*.h)
	mkdir -p $(FW_BUILD)
	$(FW_CC) $(FW_WARN) $(FW_SANFLAGS) -I$(FW_DIR) -o $@.tmp $(HARNESS_SRC) && mv $@.tmp $@

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache .ruff_cache .hypothesis
