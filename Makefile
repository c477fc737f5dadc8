# Two commands do all the set-up on a fresh machine:
#   make serve   create .venv, install, start gunicorn on 127.0.0.1:8000
#   make test    create .venv, install with the test extra, run the whole suite
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: serve test venv openapi bench verify lint clean

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

bench: $(STAMP)
	@for script in bench/*.py; do echo "== $$script"; $(BIN)/python $$script || exit 1; done

verify: $(STAMP)
	$(BIN)/python -m service.api.verification

lint: $(STAMP)
	$(BIN)/python -m pip install --quiet -e '.[test,dev]'
	$(BIN)/ruff check service schemas tests bench client_examples
	$(BIN)/mypy service schemas

clean:
	rm -rf $(VENV) .pytest_cache
