# Two commands on a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV ?= .venv
PY := $(VENV)/bin/python
ROWS ?= 200000

.PHONY: demo test lint bench install clean browser

$(PY):
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip

$(VENV)/.installed: pyproject.toml | $(PY)
	$(PY) -m pip install --quiet -e .
	touch $@

$(VENV)/.installed-test: pyproject.toml | $(PY)
	$(PY) -m pip install --quiet -e '.[test]'
	touch $@ $(VENV)/.installed

install: $(VENV)/.installed

## demo: generate the greenhouse demo data and rank it on the embedded DuckDB
demo: $(VENV)/.installed
	$(PY) examples/make_demo.py --rows $(ROWS)
	$(VENV)/bin/bitsift rank examples/data/greenhouse.duckdb --table trays --target outcome
	$(VENV)/bin/bitsift run examples/greenhouse_job.toml

## browser: headless Chromium for tests/test_report_browser.py (installed only when root and missing)
browser:
	@if [ ! -x /usr/bin/chromium ] && [ "$$(id -u)" = 0 ] && command -v apt-get >/dev/null; then \
		apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium \
		|| echo "warning: chromium not installed: the browser test skips (fails with CI=true)"; \
	fi

## test: lint, then the whole suite (PostgreSQL and MariaDB tests need the local servers)
test: $(VENV)/.installed-test browser
	$(VENV)/bin/ruff check src tests examples benchmarks
	$(PY) -m pytest

lint: $(VENV)/.installed-test
	$(VENV)/bin/ruff check src tests examples benchmarks

## bench: the side-by-side benchmark (see benchmarks/README.md for sizes)
bench: $(VENV)/.installed-test
	$(PY) benchmarks/run.py

clean:
	rm -rf $(VENV) examples/data .pytest_cache .ruff_cache dist build
