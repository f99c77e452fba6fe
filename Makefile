# iqsift: developer and quick-start targets. Needs Python 3.10+, bash and make.
PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
OUT    ?= demo_output

.PHONY: demo test install install-test bench clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

install: $(BIN)/python
	$(BIN)/python -m pip install --quiet -e .

install-test: $(BIN)/python
	$(BIN)/python -m pip install --quiet -e '.[test]'

# The Quick start demo: the main job on a capture from sample_captures/.
demo: install
	$(BIN)/python -m iqsift.demo --out $(OUT)

# The whole test suite (the same command CI runs).
test: install-test
	$(BIN)/python -m pytest -q

bench: install
	$(BIN)/python benchmarks/run_all.py

clean:
	rm -rf $(OUT) .pytest_cache build src/*.egg-info
