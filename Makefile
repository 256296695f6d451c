# Two commands on a fresh machine: `make serve` and `make test`. Everything installs into .venv.
PYTHON ?= python3
VENV ?= .venv
PY := $(VENV)/bin/python
HOST ?= 127.0.0.1
PORT ?= 8000
export HOST PORT

.PHONY: serve test lint openapi bench load clean

$(PY):
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install -q --upgrade pip

# The stamp files make a second run skip the install unless pyproject.toml or the constraints changed.
$(VENV)/.serve-installed: pyproject.toml constraints.txt | $(PY)
	$(PY) -m pip install -q -c constraints.txt -e .
	touch $@

$(VENV)/.test-installed: pyproject.toml constraints.txt | $(PY)
	$(PY) -m pip install -q -c constraints.txt -e ".[test]"
	touch $@ $(VENV)/.serve-installed

serve: $(VENV)/.serve-installed
	$(VENV)/bin/calcsvc db upgrade
	$(VENV)/bin/calcsvc db seed
	$(VENV)/bin/calcsvc serve

test: $(VENV)/.test-installed
	$(PY) -m pytest

lint: $(VENV)/.test-installed
	$(VENV)/bin/ruff check calcsvc tests benchmarks examples
	$(VENV)/bin/ruff format --check calcsvc tests benchmarks examples

openapi: $(VENV)/.serve-installed
	$(PY) -m calcsvc.openapi_spec openapi/openapi.json

# Speed figures side by side, also written to benchmarks/RESULTS.md (about 2 minutes on 2 cores; BENCH_ARGS e.g. --seconds 3).
bench: $(VENV)/.serve-installed
	$(PY) benchmarks/run.py --write-results $(BENCH_ARGS)

# A bounded mix of calculation and parts traffic (20 s); with DATABASE_URL set, against that PostgreSQL.
load: $(VENV)/.serve-installed
	$(PY) benchmarks/load.py $(LOAD_ARGS)

clean:
	rm -rf $(VENV) instance .pytest_cache
