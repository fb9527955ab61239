# Holdfast: `make demo` serves the demo fleet, `make test` runs the whole suite.
PYTHON ?= python3
VENV ?= .venv
BIN := $(VENV)/bin
PORT ?= 8000
WORKERS ?= 3
STAMP := $(VENV)/.installed-stamp

.PHONY: demo serve kit-serve kit-pack test install lint format migrations-check deploy-check clean

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

# Serve it for real: DEBUG off, gunicorn on loopback behind your TLS proxy. Needs SECRET_KEY
# (a long random string) in the environment; see README "Running it for real".
serve: install
	@test -n "$$SECRET_KEY" || { echo "make serve: set SECRET_KEY in the environment (a long random string)"; exit 1; }
	DEBUG=false $(BIN)/python manage.py migrate --noinput
	DEBUG=false $(BIN)/python manage.py collectstatic --noinput
	DEBUG=false $(BIN)/gunicorn fleet.wsgi:application --bind 127.0.0.1:$(PORT) \
		--workers $(WORKERS) --access-logfile - --forwarded-allow-ips 127.0.0.1

# On the vessel's laptop (README "Taking a kit to sea"): serve a kit file on 127.0.0.1, and pack
# its working copy to go back ashore. The kit's own settings come from its working folder.
kit-serve: install
	@test -n "$(KIT)" || { echo "make kit-serve KIT=<kit file> [KEEP=--keep]"; exit 1; }
	DEBUG=true $(BIN)/python manage.py kit_serve "$(KIT)" --port $(PORT) $(KEEP)

kit-pack: install
	@test -n "$(DIR)" -a -n "$(BY)" -a -n "$(OUT)" || { echo "make kit-pack DIR=<working folder> BY=<username> OUT=<file>"; exit 1; }
	DEBUG=true $(BIN)/python manage.py kit_pack --dir "$(DIR)" --by "$(BY)" --out "$(OUT)"

lint: install
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .
	SECRET_KEY=mypy-only $(BIN)/mypy

format: install
	$(BIN)/ruff format .
	$(BIN)/ruff check --fix .

migrations-check: install
	SECRET_KEY=migrations-check $(BIN)/python manage.py makemigrations --check --dry-run

# Django's deployment checks with production-like settings; any warning fails.
deploy-check: install
	DEBUG=false HTTPS=true ALLOWED_HOSTS=example.invalid \
		SECRET_KEY=deploy-check-$$($(BIN)/python -c "import secrets; print(secrets.token_urlsafe(48))") \
		$(BIN)/python manage.py check --deploy --fail-level WARNING

test: lint migrations-check deploy-check
	$(BIN)/pytest

clean:
	rm -rf $(VENV) db.sqlite3 db.sqlite3-* test-db*.sqlite3* staticfiles
