# Two commands do all the set-up on a fresh machine with python3:
#   make demo   renders the demo maps into out/demo
#   make test   runs the test suite
PYTHON ?= python3
VENV   ?= .venv
BIN     = $(VENV)/bin

.PHONY: demo test lint bench clean

$(BIN)/.installed: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e ".[test]"
	touch $@

demo: $(BIN)/.installed
	$(BIN)/compose demo --out out/demo

test: $(BIN)/.installed
	$(BIN)/python -m pytest -q

lint: $(BIN)/.installed
	$(BIN)/ruff check compose
	$(BIN)/mypy compose

bench: $(BIN)/.installed
	$(BIN)/python bench/color.py
	$(BIN)/python bench/render.py

clean:
	rm -rf out .pytest_cache
