# Every target builds its own virtual environment on first use, so one command does
# all set-up on a fresh machine.
#
# `make test` installs the optional extras too (`auditor[dask]`), so that the Dask engine's
# tests run on a real local cluster.
#
# `make test` also needs a browser: tests/browser/ opens the HTML report in Debian's headless
# Chromium. tools/install_browser.sh installs the `chromium` package when it is missing (as root,
# with apt-get; `apt-get update` and a second try if the first install fails), once: the stamp
# $(BROWSER_STAMP) remembers it. Where it cannot (not root, no apt-get), `make test` goes on and
# the browser tests are SKIPPED with the reason; under CI (environment variable CI set to
# anything but empty, 0, false or no -- the CI runner sets CI=true) they FAIL instead, so CI never
# passes without having opened the report. `make demo` does not need the browser.
PYTHON ?= python3
VENV   ?= .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed
BROWSER_STAMP := $(VENV)/.browser

.PHONY: demo test check bench bench-screen browser clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet -e '.[test,dask]'
	touch $(STAMP)

# No stamp when the browser could not be had, so the next `make test` tries again.
$(BROWSER_STAMP): tools/install_browser.sh | $(STAMP)
	@if bash tools/install_browser.sh; then touch $@; \
	else echo "make: no Chromium; the browser tests will be skipped (and fail under CI)"; fi

browser: $(BROWSER_STAMP)

demo: $(STAMP)
	$(PY) -m auditor demo

test: $(STAMP) $(BROWSER_STAMP)
	$(PY) -m pytest -q

# The fast tier for the edit-test loop (about two and a half minutes on 2 cores): every test not marked slow,
# on two worker processes (pytest-xdist). `make test` still runs everything, in one process.
check: $(STAMP) $(BROWSER_STAMP)
	$(PY) -m pytest -q -m "not slow" -n 2

bench: $(STAMP)
	$(PY) tests/benchmarks/run_benchmarks.py

# The screen's claims in the README (ratios to the plain loops, engines, workers, files), in one
# command: about 15 minutes on a 2-core machine.
bench-screen: $(STAMP)
	$(PY) tests/benchmarks/run_screen_benchmark.py --outcomes-list 200,1000 --engines

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache .hypothesis
