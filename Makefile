# Two commands on a fresh machine: `make demo` and `make test` (Python 3.11+ and make only).
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: demo test lint typecheck bench clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/fluxledger demo --out demo-output/

lint: $(STAMP)
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .

typecheck: $(STAMP)
	$(BIN)/mypy ledger

# Bytecode is cached even where the environment sets PYTHONDONTWRITEBYTECODE: without it every
# xdist worker rewrites every test module again and every process a test starts compiles the
# package from source, which costs about a minute of the suite's time on two cores.
test: lint typecheck
	env -u PYTHONDONTWRITEBYTECODE $(BIN)/python -m compileall -q ledger > /dev/null
	env -u PYTHONDONTWRITEBYTECODE $(BIN)/python -m pytest -q -n auto

# `make bench BENCH_ARGS=--quick` for a scaled-down run; bench/run.py --help lists the options.
bench: $(STAMP)
	$(BIN)/python bench/run.py $(BENCH_ARGS)

clean:
	rm -rf $(VENV) demo-output .pytest_cache .mypy_cache .ruff_cache .hypothesis
