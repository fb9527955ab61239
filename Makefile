# Holdfast: `make demo` serves the demo fleet, `make test` runs the whole suite.
PYTHON ?= python3
VENV ?= .venv
BIN := $(VENV)/bin
PORT ?= 8000
STAMP := $(VENV)/.installed-stamp

.PHONY: demo test install lint format migrations-check clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e ".[test]"
	touch $(STAMP)

install: $(STAMP)

demo: install
	DEBUG=true $(BIN)/python manage.py migrate --noinput
	DEBUG=true $(BIN)/python manage.py seed_demo
	@echo ""
	@echo "Holdfast demo on http://127.0.0.1:$(PORT)/"
	@echo "  logins: technician / supervisor / viewer, password holdfast-demo"
	@echo ""
	DEBUG=true $(BIN)/python manage.py runserver 127.0.0.1:$(PORT)

lint: install
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .
	SECRET_KEY=mypy-only $(BIN)/mypy

format: install
	$(BIN)/ruff format .
	$(BIN)/ruff check --fix .

migrations-check: install
	SECRET_KEY=migrations-check $(BIN)/python manage.py makemigrations --check --dry-run

test: lint migrations-check
	$(BIN)/pytest

clean:
	rm -rf $(VENV) db.sqlite3 db.sqlite3-* test-db*.sqlite3*
