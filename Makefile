PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
TESTSTAMP := $(VENV)/.installed-test

.PHONY: demo test test-slow bench clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP): $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install --quiet -e .
	touch $@

$(TESTSTAMP): $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $@ $(STAMP)

demo: $(STAMP)
	$(BIN)/agree demo

test: $(TESTSTAMP)
	$(BIN)/python -m pytest -q

test-slow: $(TESTSTAMP)
	$(BIN)/python -m pytest -q -m slow

bench: $(TESTSTAMP)
	$(BIN)/python bench/run.py

clean:
	rm -rf $(VENV) agree-demo
