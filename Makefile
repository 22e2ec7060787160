# Two commands do all the set-up on a fresh machine:
#   make demo   -- create .venv, install masterqc, run the demo
#   make test   -- create .venv, install masterqc with test extras, run the tests
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed-stamp
JOBS   ?= 2

.PHONY: demo test bench clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[test,cluster]'
	touch $(STAMP)

demo: $(STAMP)
	$(VENV)/bin/masterqc demo --out demo-output

test: $(STAMP)
	$(PY) -m pytest -q -n $(JOBS) tests

bench: $(STAMP)
	$(PY) bench/run_all.py

clean:
	rm -rf $(VENV) demo-output bench/out .pytest_cache
