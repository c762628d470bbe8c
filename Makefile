# balance-desk: two commands do all the set-up on a fresh machine.
#   make run    install what is needed, start the dashboard on the sample cases
#   make test   install what is needed, run every test
# Both are idempotent: the second time they only check and go.

PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed
EXTRAS := io,grib,app,distributed,test
PORT   ?= 5006

# nothing may reach for the network at run time
export PROJ_NETWORK := OFF

.PHONY: run test check install system samples bench verify clean

run: system install
	$(BIN)/balance-desk serve --port $(PORT)

# the checks first (lint, format, the core's types), then the suite: two workers per core
# (a browser test spends much of its time waiting on a server and a browser), each worker
# taking the next test as it frees up
WORKERS ?= $(shell echo $$(( 2 * $$(nproc 2>/dev/null || echo 2) )))
test: system install samples check
	$(BIN)/python -m pytest -n $(WORKERS) --dist worksteal $(PYTEST_ARGS)

check: install
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .
	$(BIN)/mypy

bench: install samples
	$(BIN)/python bench/core.py
	$(BIN)/python bench/io.py
	$(BIN)/python bench/app.py

verify: install
	$(BIN)/balance-desk verify

install: $(STAMP)

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)

$(STAMP): pyproject.toml .ci/constraints.txt | $(BIN)/python
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -c .ci/constraints.txt -e ".[$(EXTRAS)]"
	touch $@

# Published ERA5 sample GRIB files (from the cfgrib source distribution), for the tests.
samples: install
	@sh .ci/fetch-samples $(BIN)/python

# Debian packages: offline coastlines and the browser for the browser tests.
system:
	@sh .ci/system-packages

clean:
	rm -rf $(VENV) .pytest_cache .hypothesis build *.egg-info
