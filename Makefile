# The two commands: `make run` (service with demo data) and `make test` (the suite).
# Needs only Python 3.11+ with venv and pip on the machine.

PYTHON ?= python3
VENV ?= .venv
PY := $(VENV)/bin/python
HOST ?= 127.0.0.1
PORT ?= 8000
# Which databases `make test` runs the suite on: sqlite, postgresql, or both.
TEST_DATABASES ?= sqlite
TEST_POSTGRES_URL ?= postgresql+psycopg://postgres@127.0.0.1:5432/test
PYTEST_ARGS ?=

.PHONY: run test lint typecheck bench install clean

# The service alone for `make run`; with the test and lint tools for everything else.
$(VENV)/.installed-run: pyproject.toml
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e .
	touch $@

$(VENV)/.installed-dev: pyproject.toml
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[dev]'
	touch $@ $(VENV)/.installed-run

install: $(VENV)/.installed-dev

run: $(VENV)/.installed-run
	$(VENV)/bin/lampkeeper migrate
	$(VENV)/bin/lampkeeper demo load --if-empty
	$(VENV)/bin/lampkeeper serve --host $(HOST) --port $(PORT) --print-demo-key

test: install
	@set -e; for db in $(TEST_DATABASES); do \
	  case $$db in \
	    sqlite) url="" ;; \
	    postgresql) url="$(TEST_POSTGRES_URL)" ;; \
	    *) echo "unknown database $$db" >&2; exit 2 ;; \
	  esac; \
	  echo "=== test suite on $$db ==="; \
	  TEST_DATABASE_URL="$$url" $(PY) -m pytest -q $(PYTEST_ARGS); \
	done

lint: install
	$(VENV)/bin/ruff check service tests benchmarks migrations
	$(VENV)/bin/mypy service
	$(VENV)/bin/lint-imports

# Every benchmark, one table, var/bench/latest.json; BENCH_ARGS=--quick for a smoke run.
bench: install
	$(PY) benchmarks/run_all.py $(BENCH_ARGS)

clean:
	rm -rf $(VENV) var .pytest_cache .mypy_cache .ruff_cache
