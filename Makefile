# Two commands set everything up on a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed-stamp

.PHONY: demo test bench validate venv clean

$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

venv: $(STAMP)

demo: $(STAMP)
	$(BIN)/suitability run configs/demo.yaml --overwrite

# The tests marked "alone" measure a whole process (peak memory): they run after the rest, on their own.
test: $(STAMP)
	$(BIN)/python -m pytest -q -n 2 --timeout=900 -m "not alone"
	$(BIN)/python -m pytest -q -p no:xdist --timeout=900 -m alone

# Kernel vs plain numpy, and end-to-end runs on a size series (about 15 min on 2 cores); results in
# benchmarks/results/. Pass options with BENCH_ARGS, e.g. make bench BENCH_ARGS="--sizes 500 1000".
BENCH_ARGS ?=
bench: $(STAMP)
	$(BIN)/python benchmarks/run.py $(BENCH_ARGS)

# The model against published observations (a few minutes on 2 cores); report and figures in
# validation/results/. The quick form runs in make test (tests/test_validation.py).
validate: $(STAMP)
	$(BIN)/python -m validation.run

clean:
	rm -rf out/ .pytest_cache .hypothesis
