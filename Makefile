# Two entry points for a fresh machine: `make demo` and `make test`.
# Each creates .venv if it is missing and installs the project into it.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: demo test venv bench clean tui

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP): $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

venv: $(STAMP)

demo: $(STAMP)
	$(BIN)/precess run configs/sequences/fid-sudden.toml --rig configs/rigs/demo-sim.toml --db demo-data/demo.sqlite

tui: $(STAMP)
	$(BIN)/precess tui --rig configs/rigs/demo-sim.toml --db demo-data/demo.sqlite

test: $(STAMP)
	$(BIN)/python -m pytest $(PYTEST_ARGS)

bench: $(STAMP)
	$(BIN)/python -m benchmarks.run

clean:
	rm -rf $(VENV) demo-data .pytest_cache build *.egg-info
