# Every target does its own set-up on a fresh machine: venv, install, then run.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed

.PHONY: demo test bench clean

$(STAMP): pyproject.toml plugins/hoist/pyproject.toml
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e ".[test]"
	$(PY) -m pip install --quiet -e plugins/hoist
	touch $(STAMP)

demo: $(STAMP)
	$(PY) examples/parcel_conveyor.py

test: $(STAMP)
	$(PY) -m pytest -q

bench: $(STAMP)
	$(PY) benchmarks/run_all.py

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache
