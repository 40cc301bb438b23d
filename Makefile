# Two set-up commands: `make run` and `make test`. Both create .venv and install
# the package with its extras once; later runs skip the install unless
# pyproject.toml changed.

PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed
PTYPE_DATA_DIR ?= $(CURDIR)/.data
HOST ?= 127.0.0.1
PORT ?= 8080
export PTYPE_DATA_DIR

.PHONY: run test install system-deps bench bench-deps bench-load lint clean demo-grid docs

$(STAMP): pyproject.toml setup.py
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install -q --upgrade pip
	$(PY) -m pip install -q -e '.[dev]'
	touch $(STAMP)

install: $(STAMP)

# Debian packages the tests drive: chromium for the browser tests (never a browser
# download) and the PostgreSQL server for the multi-instance store tests.  Installed only
# when missing, and only as root; otherwise the tests that need them say why they skip.
system-deps:
	@missing=""; \
	command -v chromium >/dev/null 2>&1 || missing="$$missing chromium"; \
	ls /usr/lib/postgresql/*/bin/initdb >/dev/null 2>&1 || missing="$$missing postgresql"; \
	if [ -n "$$missing" ]; then \
	  if [ "$$(id -u)" = "0" ]; then \
	    echo "installing Debian packages for the tests:$$missing"; \
	    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq $$missing >/dev/null; \
	  else \
	    echo "missing Debian packages:$$missing (sudo apt-get install$$missing); their tests will skip"; \
	  fi; \
	fi

test: $(STAMP) system-deps
	$(VENV)/bin/ruff check ptype api tests bench soundings_demo
	$(PY) -m pytest -q

run: $(STAMP)
	@echo "ptype: starting the service on http://$(HOST):$(PORT)/ (forecaster page at /, API reference at /docs)"
	$(VENV)/bin/ptype serve --host $(HOST) --port $(PORT) --demo

bench: $(STAMP) bench-deps
	$(PY) bench/run_all.py

# Debian's wrk drives the HTTP load benchmark (bench/load_diagnose.py falls back to Python
# client threads without it).
bench-deps:
	@if ! command -v wrk >/dev/null 2>&1 && [ "$$(id -u)" = "0" ]; then \
	  echo "installing Debian wrk for the load benchmark"; \
	  apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq wrk >/dev/null; \
	fi

bench-load: $(STAMP) bench-deps
	$(PY) bench/load_diagnose.py

# Regenerate the invented model grid and turn it into a NetCDF result and a map.
demo-grid: $(STAMP)
	$(PY) soundings_demo/grid/make_grid.py
	mkdir -p $(PTYPE_DATA_DIR)/grid
	$(VENV)/bin/ptype grid soundings_demo/grid/demo_grid.nc -o $(PTYPE_DATA_DIR)/grid/demo_ptype.nc \
	  --members 20 --seed 1 --per-method --plot $(PTYPE_DATA_DIR)/grid/demo_ptype.png

# The reference manual (Sphinx; warnings are errors), in docs/_build/html.  make test builds
# it too (tests/test_docs_build.py).
docs: $(STAMP)
	$(PY) -m sphinx -W --keep-going -q -b html docs docs/_build/html
	@echo "manual: docs/_build/html/index.html"

lint: $(STAMP)
	$(VENV)/bin/ruff check ptype api tests bench soundings_demo

clean:
	rm -rf $(VENV) .data .pytest_cache build dist *.egg-info docs/_build docs/_generated \
	  docs/reference/generated
