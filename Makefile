# chairbuild developer targets. Every target builds the virtual environment first.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed

.PHONY: venv demo test test-all bench gallery clean

venv: $(STAMP)

$(STAMP): pyproject.toml setup.py
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[test]'  # setup.py bundles 3Dmol.js with npm pack
	-$(PY) -m chairbuild.assets status
	touch $(STAMP)

demo: $(STAMP)
	$(PY) -m chairbuild demo

test: $(STAMP)
	$(PY) -m pytest -m "not slow" -q

test-all: $(STAMP)
	$(PY) -m pytest -q

bench: $(STAMP)
	$(PY) tests/benchmarks/run_all.py

gallery: $(STAMP)
	$(PY) gallery/make_gallery.py --execute --screenshot

clean:
	rm -rf $(VENV) build *.egg-info
