# Two commands set everything up on a fresh clone:
#   make demo   -- runs the main job on the bundled samples (creates .venv on first use)
#   make test   -- runs the whole test suite (creates .venv on first use)
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed

.PHONY: demo test bench lint typecheck clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e ".[test,cluster,zarr,hdf5]"
	touch $(STAMP)

demo: $(STAMP)
	$(VENV)/bin/cavitas demo --out cavitas-demo --force

# The type check first: a type error fails `make test` (and so CI) before the suite runs.
test: typecheck
	$(PY) -m pytest -q

bench: $(STAMP)
	$(PY) -m bench

lint: $(STAMP)
	$(VENV)/bin/ruff check cavitas tests bench sample_volumes examples conftest.py

typecheck: $(STAMP)
	$(VENV)/bin/mypy

clean:
	rm -rf $(VENV) cavitas-demo .pytest_cache
