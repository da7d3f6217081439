# Two commands on a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV ?= .venv
PY := $(VENV)/bin/python
ROWS ?= 200000
# Every install takes the exact versions CI was verified with (the golden SQL depends on
# sqlglot's exact output); pyproject.toml keeps the looser ranges of a library install.
PIP_INSTALL := $(PY) -m pip install --quiet --constraint constraints.txt
# The fast lane leaves out what needs Spark, embedded ClickHouse, the servers or much time.
FAST_MARKERS := not (spark or clickhouse or postgres or mariadb or slow)

.PHONY: demo test test-fast lint bench install clean browser

$(PY):
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip

$(VENV)/.installed: pyproject.toml constraints.txt | $(PY)
	$(PIP_INSTALL) -e .
	touch $@

## .installed-test: the plain test extra (no pyspark, no chdb)
$(VENV)/.installed-test: pyproject.toml constraints.txt | $(PY)
	$(PIP_INSTALL) -e '.[test]'
	touch $@ $(VENV)/.installed

## .installed-test-all: test + spark + clickhouse, what CI runs with
$(VENV)/.installed-test-all: pyproject.toml constraints.txt | $(PY)
	$(PIP_INSTALL) -e '.[test-all]'
	touch $@ $(VENV)/.installed-test $(VENV)/.installed

## The SQL templates compiled ahead (src/bitsift/sql/precompiled/, ignored by git): rewritten
## whenever a template, the code that writes them or the installed packages are newer than
## the last run.
PRECOMPILED := $(VENV)/.precompiled
$(PRECOMPILED): templates/*.sql.j2 src/bitsift/sql/templates.py src/bitsift/sql/precompile.py $(VENV)/.installed
	$(PY) -m bitsift.sql.precompile
	touch $@

install: $(VENV)/.installed $(PRECOMPILED)

## demo: generate the greenhouse demo data and rank it on the embedded DuckDB
demo: $(VENV)/.installed $(PRECOMPILED)
	$(PY) examples/make_demo.py --rows $(ROWS)
	$(VENV)/bin/bitsift rank examples/data/greenhouse.duckdb --table trays --target outcome
	$(VENV)/bin/bitsift run examples/greenhouse_job.toml

## browser: headless Chromium for tests/test_report_browser.py (installed only when root and
## missing). Never a step of `make test`: a Debian package and its ~250 dependencies are the
## machine's business, not the test's. CI installs it (.ci/run); locally, without it, the one
## browser test skips and says why.
browser:
	@if [ ! -x /usr/bin/chromium ] && [ "$$(id -u)" = 0 ] && command -v apt-get >/dev/null; then \
		apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium \
		|| echo "warning: chromium not installed: the browser test skips (fails with CI=true)"; \
	fi

## test: lint and type check, then the whole suite (PostgreSQL and MariaDB tests need the
## local servers; Spark and ClickHouse tests run too). CI runs this (.ci/run).
test: $(VENV)/.installed-test-all $(PRECOMPILED)
	$(VENV)/bin/ruff check src tests examples benchmarks
	$(VENV)/bin/mypy
	$(PY) -m pytest

## test-fast: ruff, then the suite without Spark, ClickHouse, the servers and slow tests
test-fast: $(VENV)/.installed-test $(PRECOMPILED)
	$(VENV)/bin/ruff check src tests examples benchmarks
	$(PY) -m pytest -m "$(FAST_MARKERS)"

## lint: ruff and the type checker (mypy, configured in pyproject.toml: strict, on src/)
lint: $(VENV)/.installed-test
	$(VENV)/bin/ruff check src tests examples benchmarks
	$(VENV)/bin/mypy

## bench: the side-by-side benchmark (see benchmarks/README.md for sizes)
bench: $(VENV)/.installed-test
	$(PY) benchmarks/run.py

clean:
	rm -rf $(VENV) examples/data .pytest_cache .ruff_cache .mypy_cache dist build
	find src/bitsift/sql/precompiled -name '*.py' ! -name __init__.py -delete
