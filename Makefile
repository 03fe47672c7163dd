# boundsvc developer entry points.  `make demo` and `make test` work on a fresh machine
# with nothing but Python 3.11+: they create .venv and install what they need.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
PY     := $(BIN)/python
export OPENBLAS_NUM_THREADS ?= 1

.PHONY: demo test lint typecheck bench validate screenshots clean fuzz soak probe

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
	$(BIN)/ruff check boundsvc api_schemas tests demo bench validation tools fuzz
	$(BIN)/ruff format --check boundsvc api_schemas tests demo bench validation tools fuzz

typecheck: $(VENV)/.installed-all
	$(BIN)/mypy

test: $(VENV)/.installed-all
	$(BIN)/ruff check boundsvc api_schemas tests demo bench validation tools fuzz
	$(BIN)/mypy
	$(PY) -m pytest -n 2 -q

# Not part of `make test` (machine-dependent figures); writes docs/benchmarks.md.
# BENCH_ARGS=--quick for a shorter run.
bench: $(VENV)/.installed-all
	$(PY) -m bench.run_all $(BENCH_ARGS) --out docs/benchmarks.md

# Trained-network validation (cached weights; VALIDATE_ARGS=--retrain needs torch==2.13.0).
validate: $(VENV)/.installed-all
	$(PY) -m validation.run $(VALIDATE_ARGS)

# Regenerates docs/screenshots/*.png with the system Chromium.
screenshots: $(VENV)/.installed-all
	$(PY) tools/screenshots.py

# Coverage-guided fuzzing of the grammar and the request decoders (atheris, installed on
# demand; without it, a labelled Hypothesis fallback). Findings: $(FUZZ_WORK)/<harness>/crash-*.
FUZZ_SECONDS ?= 60
FUZZ_WORK ?= /tmp/boundsvc-fuzz
fuzz: $(VENV)/.installed-all
	$(PY) -c "import atheris" 2>/dev/null || $(PY) -m pip install --quiet "atheris>=2.3" || \
		echo "atheris could not be installed: using the Hypothesis fallback"
	FUZZ_SECONDS=$(FUZZ_SECONDS) FUZZ_WORK=$(FUZZ_WORK) $(PY) -m fuzz.fuzz_expr
	FUZZ_SECONDS=$(FUZZ_SECONDS) FUZZ_WORK=$(FUZZ_WORK) $(PY) -m fuzz.fuzz_request

# The long forms of tests/hardening: API fuzzing with many examples, bigger bounded load,
# then tools/soak.py (2,000 certificates x 16 clients, 10,000 requests memory check).
SOAK_ARGS ?=
soak: $(VENV)/.installed-all
	BOUNDSVC_API_FUZZ_EXAMPLES=200 BOUNDSVC_LOAD_CERTIFICATES=200 BOUNDSVC_LOAD_REQUESTS=4000 \
		$(PY) -m pytest -q tests/hardening tests/expr/test_hostile.py \
		tests/expr/test_properties.py tests/store/test_concurrency.py tests/test_sandbox.py
	$(PY) tools/soak.py $(SOAK_ARGS)

# Randomized soundness probe through the HTTP contract (bound >= true error, no 5xx);
# findings as JSON lines in PROBE_OUT. See docs/reliability.md.
PROBE_ARGS ?= --seed 11 --cases 300
PROBE_OUT ?= /tmp/boundsvc-probe.jsonl
probe: $(VENV)/.installed-all
	$(PY) tools/probe_soundness.py $(PROBE_ARGS) --out $(PROBE_OUT)

clean:
	rm -rf $(VENV) .pytest_cache .mypy_cache .ruff_cache
