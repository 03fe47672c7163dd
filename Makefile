# boundsvc developer entry points.  `make demo` and `make test` work on a fresh machine
# with nothing but Python 3.11+: they create .venv and install what they need.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
PY     := $(BIN)/python
export OPENBLAS_NUM_THREADS ?= 1

.PHONY: demo test lint typecheck bench validate screenshots clean

$(BIN)/activate:
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip setuptools wheel

# Installed once per change of pyproject.toml.
$(VENV)/.installed-demo: pyproject.toml | $(BIN)/activate
	$(PY) -m pip install --quiet -e ".[server,client]"
	touch $@

$(VENV)/.installed-all: pyproject.toml | $(BIN)/activate
	$(PY) -m pip install --quiet -e ".[all]"
	touch $@ $(VENV)/.installed-demo

demo: $(VENV)/.installed-demo
	$(PY) -m demo.run_demo

lint: $(VENV)/.installed-all
	$(BIN)/ruff check boundsvc api_schemas tests demo bench validation
	$(BIN)/ruff format --check boundsvc api_schemas tests demo bench validation

typecheck: $(VENV)/.installed-all
	$(BIN)/mypy

test: $(VENV)/.installed-all
	$(BIN)/ruff check boundsvc api_schemas tests demo bench validation
	$(BIN)/mypy
	$(PY) -m pytest -n 2 -q

bench: $(VENV)/.installed-all
	$(PY) -m bench.run_all

# Trained-network validation (cached weights; VALIDATE_ARGS=--retrain needs torch==2.13.0).
validate: $(VENV)/.installed-all
	$(PY) -m validation.run $(VALIDATE_ARGS)

# Regenerates docs/screenshots/*.png with the system Chromium.
screenshots: $(VENV)/.installed-all
	$(PY) tools/screenshots.py

clean:
	rm -rf $(VENV) .pytest_cache .mypy_cache .ruff_cache
