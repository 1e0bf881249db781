# padtune: every install step lives here, so a fresh clone needs nothing but Python 3.11+ and make.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
# The stamps record which install the venv holds; they are redone when pyproject or the pins change.
RUN_STAMP := $(VENV)/.stamp-run
TEST_STAMP := $(VENV)/.stamp-test

.PHONY: demo test bench reliability lint snapshots-update clean firmware firmware-size firmware-harness

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

# The reliability suite (issue 13): decoder fuzz, kill -9 during saves and recordings, unplug/replug,
# hostile inputs, garbage flood, soak. One table of figures; exits non-zero when one is out of bounds.
# Not part of `make test` (which runs each part's quick version); under 10 minutes on 2 cores.
reliability: $(TEST_STAMP)
	$(BIN)/python tests/reliability/run.py

lint: $(TEST_STAMP)
	$(BIN)/ruff check .

snapshots-update: $(TEST_STAMP)
	$(BIN)/python -m pytest -q tests/tui tests/headless --snapshot-update

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache .ruff_cache .hypothesis

# The C firmware library (devices/firmware): built with the system C compiler ($(CC), cc by default)
# into build/firmware/libpadtune_fw.a, then its host test: the vector runner compiled with the strict
# flags under AddressSanitizer and UndefinedBehaviorSanitizer prints exactly each vector's expected lines
# (tests/vectors/*.vec, written by processing.reference.PlainEngine).
FW := devices/firmware
FW_BUILD := build/firmware
FW_STRICT := -std=c99 -Wall -Wextra -Werror -pedantic
FW_SANITIZE := -fsanitize=address,undefined -fno-sanitize-recover=undefined -fno-omit-frame-pointer -g -O1
FW_SRC := $(wildcard $(FW)/pt_*.c)
FW_HDR := $(wildcard $(FW)/pt_*.h)

firmware: $(FW_BUILD)/libpadtune_fw.a $(FW_BUILD)/vector_runner
	@for v in tests/vectors/*.vec; do \
		$(FW_BUILD)/vector_runner $$v > $(FW_BUILD)/vector.out || exit 1; \
		grep '^=' $$v | diff -u - $(FW_BUILD)/vector.out > $(FW_BUILD)/vector.diff \
			|| { echo "$$v: the C library differs from the reference:"; head -20 $(FW_BUILD)/vector.diff; exit 1; }; \
		echo "$$v: same as the reference"; \
	done

$(FW_BUILD)/libpadtune_fw.a: $(FW_SRC) $(FW_HDR)
	@mkdir -p $(FW_BUILD)
	cd $(FW_BUILD) && $(CC) $(FW_STRICT) -O2 -c $(addprefix $(CURDIR)/,$(FW_SRC))
	$(AR) rcs $@ $(addprefix $(FW_BUILD)/,$(notdir $(FW_SRC:.c=.o)))

$(FW_BUILD)/vector_runner: $(FW)/pt_detect.c $(FW)/pt_groups.c $(FW_HDR) tests/firmware/vector_runner.c
	@mkdir -p $(FW_BUILD)
	$(CC) $(FW_STRICT) $(FW_SANITIZE) -I$(FW) $(FW)/pt_detect.c $(FW)/pt_groups.c tests/firmware/vector_runner.c -o $@

# Flash and RAM per part on a Cortex-M0+ (arm-none-eabi-gcc -Os); says how to install it when missing.
firmware-size:
	$(PYTHON) $(FW)/size.py

# The C library as a board on this computer (devices/firmware/harness/, see DEVELOPERS.md): `make
# firmware-harness`, then `build/firmware/pt_harness --pty`. FW_SAN=1 builds it under AddressSanitizer and
# UndefinedBehaviorSanitizer (the tests do, with FW_BUILD set to a folder of their own).
HARNESS_SRC := $(FW)/harness/pt_harness.c $(FW_SRC)

firmware-harness: $(FW_BUILD)/pt_harness

$(FW_BUILD)/pt_harness: $(HARNESS_SRC) $(FW_HDR)
	@mkdir -p $(FW_BUILD)
	$(CC) $(FW_STRICT) $(if $(filter 1,$(FW_SAN)),$(FW_SANITIZE),-O2) -I$(FW) -o $@.tmp $(HARNESS_SRC) && mv $@.tmp $@
