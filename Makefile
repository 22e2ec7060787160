# Two commands do all the set-up on a fresh machine:
#   make demo   -- create .venv, install masterqc with its run-time dependencies only, run the demo
#   make test   -- the same .venv plus the test extras (pytest, hypothesis, oracles, dask), run the tests
# `make mutation` (mutation testing of the pure modules, not part of `make test`) adds mutmut.
PYTHON ?= python3
VENV   := .venv
PY     := $(VENV)/bin/python
BASE_STAMP     := $(VENV)/.base-stamp
STAMP          := $(VENV)/.installed-stamp
MUTATION_STAMP := $(VENV)/.mutation-stamp
JOBS   ?= 2
# one module group at a time (mutmut name patterns); scores: tools/mutation_scores.py
MUTATION_MODULES ?= masterqc.measure.levels masterqc.audio.isrc masterqc.timecode masterqc.spec masterqc.judge

.PHONY: demo test test-heavy bench mutation clean

$(PY):
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip

# masterqc and what it needs to run (the demo): no test or cluster extras; installed again when
# the optional compiled kernel (setup.py, masterqc/measure/_cascade.c) changes
$(BASE_STAMP): pyproject.toml setup.py masterqc/measure/_cascade.c | $(PY)
	$(PY) -m pip install --quiet -e .
	touch $@

# everything the tests need (this stamp name is kept for scripts that build it directly)
$(STAMP): pyproject.toml $(BASE_STAMP)
	$(PY) -m pip install --quiet -e '.[test,cluster]'
	touch $@

$(MUTATION_STAMP): pyproject.toml $(STAMP)
	$(PY) -m pip install --quiet -e '.[test,cluster,mutation]'
	touch $@

demo: $(BASE_STAMP)
	$(VENV)/bin/masterqc demo --out demo-output

test: $(STAMP)
	$(PY) -m pytest -q -n $(JOBS) --dist loadgroup tests

# `make test` plus the bench-like tests marked heavy (tests/conftest.py: HEAVY_PARAMS)
test-heavy: $(STAMP)
	$(PY) -m pytest -q -n $(JOBS) --dist loadgroup --run-heavy tests

bench: $(STAMP)
	$(PY) bench/run_all.py

# CPU-heavy: each module group runs only the tests named in [tool.mutmut] of pyproject.toml
mutation: $(MUTATION_STAMP)
	@mkdir -p mutants
	@for m in $(MUTATION_MODULES); do \
		echo "mutation: $$m (log: mutants/run-$$m.log)"; \
		$(VENV)/bin/mutmut run --max-children $(JOBS) "$$m.*" > mutants/run-$$m.log 2>&1 || { tail -n 30 mutants/run-$$m.log; exit 1; }; \
	done
	$(PY) tools/mutation_scores.py

clean:
	rm -rf $(VENV) demo-output bench/out .pytest_cache mutants
