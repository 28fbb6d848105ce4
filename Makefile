# Two commands for a fresh machine (see README.md):
#   make run   install everything, migrate a SQLite database, load the demo, serve on 127.0.0.1:8000
#   make test  install everything (Debian packages too), then run the whole test suite,
#              browser and PostgreSQL tests included
VENV ?= .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed

.PHONY: run test install system-deps lint bench clean

$(STAMP): pyproject.toml constraints.txt
	python3 -m venv $(VENV)
	$(VENV)/bin/pip install -q --upgrade pip
	$(VENV)/bin/pip install -q -c constraints.txt -e '.[test]'
	touch $(STAMP)

install: $(STAMP)

system-deps:
	bash scripts/system-deps.sh

run: system-deps install
	$(VENV)/bin/panelwright db upgrade
	$(VENV)/bin/panelwright demo
	$(VENV)/bin/panelwright serve --single-user

lint: install
	$(VENV)/bin/ruff check .
	$(VENV)/bin/ruff format --check .

test: system-deps install lint
	bash scripts/with-postgres.sh $(VENV)/bin/pytest --browser -p no:cacheprovider

bench: install
	for b in tests/benchmarks/bench_*.py; do $(PY) -m tests.benchmarks.$$(basename $$b .py) || exit 1; done

clean:
	rm -rf $(VENV) test-artifacts .pytest_cache .ruff_cache
