# One-command set-up: every target creates .venv when it is missing.
PYTHON ?= python3
VENV   ?= .venv
BIN     = $(VENV)/bin
STAMP   = $(VENV)/.installed-test

.PHONY: install demo test bench firmware clean

$(BIN)/saglog: pyproject.toml
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install -q --upgrade pip
	$(BIN)/python -m pip install -q -e .
	touch $(BIN)/saglog

$(STAMP): $(BIN)/saglog pyproject.toml
	$(BIN)/python -m pip install -q -e '.[test]'
	touch $(STAMP)

install: $(BIN)/saglog

demo: $(BIN)/saglog
	$(BIN)/saglog demo

test: $(STAMP)
	$(BIN)/python -m pytest -q -n 2 -p no:cacheprovider

bench: $(STAMP)
	$(BIN)/python -m benchmarks

firmware:
	$(MAKE) -C firmware_notes all

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache
