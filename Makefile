# Two commands on a fresh machine: `make serve` and `make test`. Everything installs into .venv.
PYTHON ?= python3
VENV ?= .venv
PY := $(VENV)/bin/python
HOST ?= 127.0.0.1
PORT ?= 8000
export HOST PORT

.PHONY: serve test lint openapi bench clean

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
	$(VENV)/bin/ruff check calcsvc tests
	$(VENV)/bin/ruff format --check calcsvc tests

openapi: $(VENV)/.serve-installed
	$(PY) -m calcsvc.openapi_spec openapi/openapi.json

bench: $(VENV)/.test-installed
	$(PY) benchmarks/run.py

clean:
	rm -rf $(VENV) instance .pytest_cache
