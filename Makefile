# The two README commands: `make demo` and `make test`. Each sets itself up from nothing.
PYTHON ?= python3
VENV ?= .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed-stamp
# Hermetic runs: no plugin but ours (and xdist where asked) may change a result.
HERMETIC := PYTEST_DISABLE_PLUGIN_AUTOLOAD=1

.PHONY: demo test lint bench study pictures clean tuning-demo explore

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[test,plots]'
	touch $(STAMP)

test: $(STAMP)
	$(HERMETIC) $(PY) -m pytest -p meanband -p xdist -n 2 -q tests

# Property tests with fresh random examples and many more of them (slow; by hand).
explore: $(STAMP)
	HYPOTHESIS_PROFILE=explore $(HERMETIC) $(PY) -m pytest -p meanband -p xdist -n 2 -q tests

lint: $(STAMP)
	$(VENV)/bin/ruff check plugin tests benchmarks sample_suites studies
	$(VENV)/bin/mypy

# The latency and bench suites; one real failure, which must fail (exit status 1) for the demo
# to go on; then the trial-tuning loop on sample_suites/tuning.
demo: $(STAMP)
	$(HERMETIC) $(PY) -m pytest -p meanband -p no:cacheprovider sample_suites --ignore=sample_suites/tuning --ignore=sample_suites/failure
	@echo "--- what a failing check looks like: this run is expected to fail ---"
	$(HERMETIC) $(PY) -m pytest -p meanband -p no:cacheprovider sample_suites/failure; test $$? -eq 1
	$(MAKE) --no-print-directory tuning-demo

pictures: $(STAMP)
	$(PY) docs/pictures.py

# Trial tuning: run with a first guess and write the suggested plan, show it, run with it.
TUNING := $(HERMETIC) $(PY) -m pytest -p meanband -p no:cacheprovider sample_suites/tuning
tuning-demo: $(STAMP)
	$(TUNING) --meanband-plan sample_suites/tuning/first-guess.toml --meanband-write-plan out/tuning-plan.toml
	cat out/tuning-plan.toml
	$(TUNING) --meanband-plan out/tuning-plan.toml

bench: $(STAMP)
	for script in benchmarks/*.py; do $(PY) $$script || exit 1; done

study: $(STAMP)
	$(PY) studies/coverage.py

clean:
	rm -rf $(VENV) .pytest_cache .hypothesis build *.egg-info plugin/*.egg-info
