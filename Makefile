# Two commands do all the set-up on a fresh machine with python3:
#   make demo   renders the demo maps into out/demo
#   make test   runs the test suite
PYTHON ?= python3
VENV   ?= .venv
BIN     = $(VENV)/bin

.PHONY: demo test lint bench clean bytecode

# setup.py and the C source too: the editable install builds the statistics' C extension
# (compose._kernels) into the tree once, so a changed source must install again.
$(BIN)/.installed: pyproject.toml setup.py compose/_kernels.c
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e ".[test]"
	touch $@

# Byte-compile the package as a regular (non-editable) install does: with
# PYTHONDONTWRITEBYTECODE set, an editable install would otherwise compile every module it
# imports on every command (about 0.1 s of `compose check`). Stale files are recompiled in memory.
bytecode: $(BIN)/.installed
	$(BIN)/python -m compileall -q compose

demo: bytecode
	$(BIN)/compose demo --out out/demo

test: bytecode
	$(BIN)/python -m pytest -q

lint: $(BIN)/.installed
	$(BIN)/ruff check compose tests bench
	$(BIN)/mypy compose

bench: bytecode
	$(BIN)/python bench/color.py
	$(BIN)/python bench/render.py

clean:
	rm -rf out .pytest_cache
