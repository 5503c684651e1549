# Every target builds its own virtual environment on first use, so one command does
# all set-up on a fresh machine.
PYTHON ?= python3
VENV   ?= .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed

.PHONY: demo test bench clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet -e '.[test]'
	touch $(STAMP)

demo: $(STAMP)
	$(PY) -m auditor demo

test: $(STAMP)
	$(PY) -m pytest -q

bench: $(STAMP)
	$(PY) tests/benchmarks/run_benchmarks.py

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache .hypothesis
