# Two commands do all set-up on a fresh machine with Python 3.11+:
#   make run   -> create .venv if missing, install, run the default sweep on all cores
#   make test  -> same set-up plus test tools, then the test suite
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed-$(shell cat pyproject.toml | cksum | cut -d' ' -f1)

.PHONY: run test test-cluster lint bench clean-results install

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e '.[test]'
	rm -f $(VENV)/.installed-*
	touch $@

install: $(STAMP)

run: $(STAMP)
	$(BIN)/eigensweep run --config config/config.yaml --cores $(or $(CORES),$(shell nproc 2>/dev/null || echo 2))

# pytest exits 5 when it collects no test: treat that as a failure, deliberately.
# One pytest-xdist worker per core (TEST_WORKERS=0: one process); a test file stays on one
# worker (--dist loadfile), so module-scoped sweeps are computed once.
TEST_WORKERS ?= $(shell nproc 2>/dev/null || echo 2)
test: $(STAMP)
	@$(BIN)/python -m pytest -q -n $(TEST_WORKERS) --dist loadfile $(PYTEST_ARGS); rc=$$?; \
	if [ $$rc -eq 5 ]; then echo "make test: no tests were collected" >&2; exit 1; fi; exit $$rc

lint: $(STAMP)
	$(BIN)/ruff check src tests benchmarks
	$(BIN)/ruff format --check src tests benchmarks
	$(BIN)/snakefmt --check Snakefile workflow/rules
	$(BIN)/snakemake --lint --configfile config/config.yaml

bench: $(STAMP)
	$(BIN)/python benchmarks/bench_mapping.py
	$(BIN)/python benchmarks/bench_optimize.py

clean-results:
	find results -mindepth 1 -maxdepth 1 ! -name README.md -exec rm -rf {} +
	rm -rf logs .snakemake

# Real one-node Slurm cluster on this machine (root; installs Debian's slurm-wlm and munge).
test-cluster: $(STAMP)
	bash tests/cluster/run-slurm-test.sh
