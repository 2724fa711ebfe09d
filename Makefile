# chairbuild developer targets. Every target builds the virtual environment first.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed

.PHONY: venv demo test test-all bench clean

venv: $(STAMP)

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[test]'
	touch $(STAMP)

demo: $(STAMP)
	$(PY) -m chairbuild demo

test: $(STAMP)
	$(PY) -m pytest -m "not slow" -q

test-all: $(STAMP)
	$(PY) -m pytest -q

bench: $(STAMP)
	$(PY) tests/benchmarks/run_all.py

clean:
	rm -rf $(VENV) build *.egg-info
