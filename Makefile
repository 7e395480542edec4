# The two README commands: `make demo` and `make test` (lint, then the tests). Both set up
# .venv first.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed

.PHONY: demo test lint bench accuracy clean venv

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[test]'
	touch $(STAMP)

venv: $(STAMP)

demo: $(STAMP)
	$(VENV)/bin/roomconv demo --out demo_out --force

# Lint first: a style or type error stops the run before the (longer) test suite.
test: lint
	$(PY) -m pytest -q

# Style, likely bugs and types of the library; `make test` runs it first.
lint: $(STAMP)
	$(PY) -m ruff check roomconv tui tests benchmarks demo_audio
	$(PY) -m ruff format --check roomconv tui tests benchmarks demo_audio
	$(PY) -m mypy

bench: $(STAMP)
	$(PY) -m benchmarks.run

# Accuracy of the analysis on synthetic responses of known truth (a report: exits 0).
accuracy: $(STAMP)
	$(PY) -m benchmarks.accuracy

clean:
	rm -rf $(VENV) demo_out .pytest_cache
