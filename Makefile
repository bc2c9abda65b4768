# The two commands a new user needs are `make run` and `make test`; each sets
# everything up on first use (a virtual environment in .venv with the project
# installed into it).

PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
# the runtime alone (make run), and the runtime with the test tools (everything else)
RUN_STAMP  := $(VENV)/.installed-run
TEST_STAMP := $(VENV)/.installed-test
PORT   ?= 8000
DESIGN ?=

.PHONY: run test bench fuzz load format lint clean

$(RUN_STAMP): pyproject.toml
	@test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --disable-pip-version-check -e .
	@touch $(RUN_STAMP)

$(TEST_STAMP): pyproject.toml
	@test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --disable-pip-version-check -e '.[test]'
	@touch $(TEST_STAMP) $(RUN_STAMP)

## Serve the design sheet on http://127.0.0.1:8000 with a sample design open.
## `make run PORT=8080` picks the port; `make run DESIGN=my.json` opens a design file.
run: $(RUN_STAMP)
	$(BIN)/ringwise serve --port $(PORT) $(DESIGN)

## Style checks, then the whole test suite (browser tests included when Chromium is present).
test: $(TEST_STAMP)
	$(BIN)/ruff format --check app tests
	$(BIN)/ruff check app tests
	$(BIN)/python -m pytest

## Speed figures (medians and ratios to the targets); prints, never fails on time.
bench: $(TEST_STAMP)
	$(BIN)/python -m ringwise.bench

## The fuzz tests with a larger budget: Schemathesis with every field's boundary
## cases and 200 examples per operation, Hypothesis at 10x (several minutes).
fuzz: $(TEST_STAMP)
	RINGWISE_FUZZ_EXAMPLES=200 RINGWISE_FUZZ_COVERAGE=1 RINGWISE_FUZZ_SCALE=10 \
		$(BIN)/python -m pytest -q tests/web/test_fuzz_api.py tests/web/test_fuzz_core.py

## Load benchmark on 127.0.0.1: 200 clients for 30 s with heavy requests mixed in;
## prints requests/s, p50/p99 of analyze and the errors (a benchmark, never fails on time).
load: $(TEST_STAMP)
	$(BIN)/python -m ringwise.web.load

## Rewrite the code in the project's format and apply safe lint fixes.
format: $(TEST_STAMP)
	$(BIN)/ruff format app tests
	$(BIN)/ruff check --fix app tests

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache .ruff_cache test-artifacts
