# Two commands do all the set-up on a fresh machine:
#   make serve   create .venv, install, start gunicorn on 127.0.0.1:8000
#   make test    create .venv, install with the test extra, run the whole suite
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: serve test venv openapi bench verify fuzz load lint clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

venv: $(STAMP)

serve: $(STAMP)
	$(BIN)/gunicorn -c deploy/gunicorn.conf.py

test: $(STAMP)
	$(BIN)/python -m pytest

openapi: $(STAMP)
	$(BIN)/python -m service.openapi > docs/openapi.json

# every bench/ script; the figures and ratios go to docs/benchmarks.md
bench: $(STAMP)
	$(BIN)/python -m pip install --quiet -e '.[test,bench]'
	@{ echo "# Benchmarks"; echo; echo "Written by \`make bench\` on $$(date -u +%Y-%m-%d) ($$(nproc) cores, load $$(cut -d' ' -f1 /proc/loadavg))."; \
	  for script in bench/[a-z]*.py; do echo; echo "## $$script"; echo; echo '```'; \
	  OPENBLAS_NUM_THREADS=1 $(BIN)/python $$script 2>&1 || exit 1; echo '```'; done; } > docs/benchmarks.md
	@cat docs/benchmarks.md

fuzz: $(STAMP)
	CONDUCTION_FUZZ_EXAMPLES=300 $(BIN)/python -m pytest tests/fuzz -q

load: $(STAMP)
	$(BIN)/python bench/load.py

verify: $(STAMP)
	$(BIN)/python -m service.api.verification --readme

lint: $(STAMP)
	$(BIN)/python -m pip install --quiet -e '.[test,dev]'
	$(BIN)/ruff check service schemas tests bench client_examples
	$(BIN)/mypy service schemas

clean:
	rm -rf $(VENV) .pytest_cache
