# Two entry points, both usable on a fresh machine with Python 3.11+:
#   make demo  - create .venv, install, start the service on SQLite, submit the demo scenario
#   make test  - create .venv, install with test extras, run the whole test suite
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin

.PHONY: install demo test bench

$(BIN)/.installed: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install -q --upgrade pip
	$(BIN)/python -m pip install -q -e '.[test]'
	touch $@

install: $(BIN)/.installed

demo: install
	$(BIN)/python -m service.demo

test: install
	$(BIN)/python -m pytest

bench: install
	$(BIN)/python benchmarks/cross_section.py
